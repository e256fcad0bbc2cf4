/**
 * Alarm priority shown by shape AND colour AND number, so it reads without colour vision
 * (ISA-101 / ISA-18.2 practice: priority must not rely on colour alone). Our shapes: 1 a
 * diamond, 2 a downward triangle, 3 a square, 4 a circle.
 */
const LOOK: Record<number, { fill: string; path: string }> = {
  1: { fill: 'var(--color-alarm-1)', path: 'M8 1 L15 8 L8 15 L1 8 Z' },
  2: { fill: 'var(--color-alarm-2)', path: 'M1 2 L15 2 L8 15 Z' },
  3: { fill: 'var(--color-alarm-3)', path: 'M2 2 H14 V14 H2 Z' },
  4: { fill: 'var(--color-alarm-4)', path: 'M8 1 A7 7 0 1 0 8.01 1 Z' },
};

export function PriorityMark({ priority, muted = false }: { priority: number; muted?: boolean }) {
  const look = LOOK[priority] ?? LOOK[4]!;
  return (
    <svg width="16" height="16" viewBox="0 0 16 16" role="img" aria-label={`priority ${priority}`} className="inline-block align-middle">
      <path d={look.path} fill={muted ? 'none' : look.fill} stroke={look.fill} strokeWidth={muted ? 1.5 : 0} />
      <text x="8" y={priority === 2 ? 9 : 11} textAnchor="middle" fontSize="8" fontFamily="JetBrains Mono, monospace" fill={muted ? look.fill : '#fff'} fontWeight="600">
        {priority}
      </text>
    </svg>
  );
}
