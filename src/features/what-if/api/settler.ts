import { useMutation } from '@tanstack/react-query';
import type { z } from 'zod';
import type { SettlerResponse, settlerRequest } from '../../../../shared/contracts/calc.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** Layered settler steady state: `POST /api/v1/calc/settler` (stateless; the server runs the same shared/domain code). */
export function postSettler(body: z.input<typeof settlerRequest>, signal?: AbortSignal): Promise<SettlerResponse> {
  return api<SettlerResponse>(paths.calc('settler'), { body, signal });
}

/** A calculator reads and writes nothing on the server, so there is no query to invalidate. */
export function useSettlerCalc() {
  return useMutation({ mutationKey: ['calc', 'settler'], mutationFn: (body: z.input<typeof settlerRequest>) => postSettler(body) });
}
