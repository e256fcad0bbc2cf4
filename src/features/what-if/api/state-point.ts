import { useMutation } from '@tanstack/react-query';
import type { z } from 'zod';
import type { StatePointResponse, statePointRequest } from '../../../../shared/contracts/calc.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** State point analysis: `POST /api/v1/calc/state-point` (stateless; the server runs the same shared/domain code). */
export function postStatePoint(body: z.input<typeof statePointRequest>, signal?: AbortSignal): Promise<StatePointResponse> {
  return api<StatePointResponse>(paths.calc('state-point'), { body, signal });
}

/** A calculator reads and writes nothing on the server, so there is no query to invalidate. */
export function useStatePointCalc() {
  return useMutation({ mutationKey: ['calc', 'state-point'], mutationFn: (body: z.input<typeof statePointRequest>) => postStatePoint(body) });
}
