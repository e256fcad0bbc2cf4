import { useMutation } from '@tanstack/react-query';
import type { z } from 'zod';
import type { StormResponse, stormRequest } from '../../../../shared/contracts/calc.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** Storm projection: `POST /api/v1/calc/storm` (stateless; the server runs the same shared/domain code). */
export function postStorm(body: z.input<typeof stormRequest>, signal?: AbortSignal): Promise<StormResponse> {
  return api<StormResponse>(paths.calc('storm'), { body, signal });
}

/** A calculator reads and writes nothing on the server, so there is no query to invalidate. */
export function useStormCalc() {
  return useMutation({ mutationKey: ['calc', 'storm'], mutationFn: (body: z.input<typeof stormRequest>) => postStorm(body) });
}
