import { alarmAckParams, alarmAckRequest, alarmOut } from '../../shared/contracts/alarm.ts';
import type { AppContext } from '../app-context.ts';
import { assertPlantAccess } from '../auth/middleware.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';
import { alarmService } from '../services/alarm.service.ts';
import { notifyStream } from '../services/stream.service.ts';

/** Alarm actions (the alarm list is GET /plants/:plantId/alarms in plants.routes.ts). */
export function alarmsRoutes(ctx: AppContext): RouteDef[] {
  const svc = alarmService(ctx, {
    changed: (a, change) => notifyStream(ctx.db.pool, a.plantId, 'alarm', { change, alarm: a }).catch((err) => ctx.log.warn({ err }, 'alarm notify failed')),
  });
  return [
    defineRoute({
      method: 'post',
      path: '/plants/:plantId/alarms/:alarmId/ack',
      role: 'operator',
      tag: 'alarms',
      summary: 'Acknowledge an alarm (ISA-18.2): records who and when; a cleared, unacknowledged alarm can be acknowledged too; audited',
      params: alarmAckParams,
      body: alarmAckRequest,
      response: alarmOut,
      handler: ({ params, body, req }) => {
        assertPlantAccess(req, params.plantId);
        return svc.acknowledge(req, params.plantId, params.alarmId, body.comment);
      },
    }),
  ];
}
