import type { Request } from 'express';
import { putSettingsRequest, settingsOut, settingsQuery, type PutSettingsRequest } from '../../shared/contracts/settings.ts';
import type { AppContext } from '../app-context.ts';
import type { RouteDef } from '../http/route.ts';
import { settingsService } from '../services/settings.service.ts';

export function settingsRoutes(ctx: AppContext): RouteDef[] {
  const svc = settingsService(ctx);
  return [
    {
      method: 'get',
      path: '/settings',
      role: 'analyst',
      tag: 'settings',
      summary: 'Effective settings (thresholds, SRT target, windows, mail) for a plant (?plantId=, 0 = global), with defaults and where each value comes from',
      query: settingsQuery,
      response: settingsOut,
      handler: (req: Request) => svc.describe((req.valid.query as { plantId: number }).plantId),
    },
    {
      method: 'put',
      path: '/settings',
      role: 'admin',
      tag: 'settings',
      summary: 'Set values for a plant (plantId 0 = global); null removes an override; audited',
      body: putSettingsRequest,
      response: settingsOut,
      handler: (req: Request) => svc.put(req, req.valid.body as PutSettingsRequest),
    },
  ];
}
