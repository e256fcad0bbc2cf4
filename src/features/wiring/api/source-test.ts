import { useMutation } from '@tanstack/react-query';
import type { ConnectionTestOut } from '../../../../shared/contracts/wiring.ts';
import { api } from '../../../lib/api-client.ts';
import { paths } from '../../../lib/paths.ts';

/** `POST /sources/:id/test`: connects with the stored settings; a far-end failure is ok:false (200), not an error. */
export function testSource(sourceId: number) {
  return api<ConnectionTestOut>(paths.sourceTest(sourceId), { method: 'POST' });
}

export function useTestSource() {
  return useMutation({ mutationFn: testSource });
}
