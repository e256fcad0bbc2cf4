import { useMutation } from '@tanstack/react-query';
import type { z } from 'zod';
import type { SviResponse, sviRequest } from '../../../../shared/contracts/calc.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** Settleability index (SVI, DSVI, SSVI): `POST /api/v1/calc/svi` (stateless; the server runs the same shared/domain code). */
export function postSvi(body: z.input<typeof sviRequest>, signal?: AbortSignal): Promise<SviResponse> {
  return api<SviResponse>(paths.calc('svi'), { body, signal });
}

/** A calculator reads and writes nothing on the server, so there is no query to invalidate. */
export function useSviCalc() {
  return useMutation({ mutationKey: ['calc', 'svi'], mutationFn: (body: z.input<typeof sviRequest>) => postSvi(body) });
}
