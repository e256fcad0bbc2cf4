import { useMutation } from '@tanstack/react-query';
import type { z } from 'zod';
import type { SrtResponse, srtRequest } from '../../../../shared/contracts/calc.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** Sludge age (SRT) and WAS advisor: `POST /api/v1/calc/srt` (stateless; the server runs the same shared/domain code). */
export function postSrt(body: z.input<typeof srtRequest>, signal?: AbortSignal): Promise<SrtResponse> {
  return api<SrtResponse>(paths.calc('srt'), { body, signal });
}

/** A calculator reads and writes nothing on the server, so there is no query to invalidate. */
export function useSrtCalc() {
  return useMutation({ mutationKey: ['calc', 'srt'], mutationFn: (body: z.input<typeof srtRequest>) => postSrt(body) });
}
