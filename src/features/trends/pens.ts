/** Pens one trend shows at most: eight lanes still fit a control-room screen with readable axes. */
export const MAX_PENS = 8;
