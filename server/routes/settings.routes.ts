import type { Request } from 'express';
import { putSettingsRequest, settingsOut, settingsQuery, type PutSettingsRequest } from '../../shared/contracts/settings.ts';
import type { AppContext } from '../app-context.ts';
import { assertPlantAccess } from '../auth/middleware.ts';
import { ForbiddenError } from '../http/errors.ts';
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
      handler: (req: Request) => {
        const { plantId } = req.valid.query as { plantId: number };
        // A plant-scoped token reads its plants' settings (and the global level), no others.
        if (plantId !== 0) assertPlantAccess(req, plantId);
        return svc.describe(plantId);
      },
    },
    {
      method: 'put',
      path: '/settings',
      role: 'admin',
      tag: 'settings',
      summary: 'Set values for a plant (plantId 0 = global); null removes an override; audited',
      body: putSettingsRequest,
      response: settingsOut,
      handler: (req: Request) => {
        const body = req.valid.body as PutSettingsRequest;
        if (body.plantId === 0 && req.principal?.plantIds) throw new ForbiddenError('a plant-scoped token cannot change the global settings');
        if (body.plantId !== 0) assertPlantAccess(req, body.plantId);
        return svc.put(req, body);
      },
    },
  ];
}
