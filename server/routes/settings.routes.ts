import { putSettingsRequest, settingsOut, settingsQuery } from '../../shared/contracts/settings.ts';
import { services, type AppContext } from '../app-context.ts';
import { ForbiddenError } from '../http/errors.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { assertPlantScope } from '../services/plant.service.ts';

export function settingsRoutes(ctx: AppContext): RouteDef[] {
  const svc = services(ctx).settings;
  return [
    defineRoute({
      method: 'get',
      path: '/settings',
      role: 'analyst',
      tag: 'settings',
      summary: 'Effective settings (thresholds, SRT target, windows, mail) for a plant (?plantId=, 0 = global), with defaults and where each value comes from',
      query: settingsQuery,
      response: settingsOut,
      handler: ({ query, principal }) => svc.describe(principal, query.plantId),
    }),
    defineRoute({
      method: 'put',
      path: '/settings',
      role: 'admin',
      tag: 'settings',
      summary: 'Set values for a plant (plantId 0 = global); null removes an override; audited',
      body: putSettingsRequest,
      response: settingsOut,
      handler: ({ body, principal }) => {
        if (body.plantId === 0 && principal.plantIds) throw new ForbiddenError('a plant-scoped token cannot change the global settings');
        if (body.plantId !== 0) assertPlantScope(principal, body.plantId);
        return svc.put(principal, body);
      },
    }),
  ];
}
