import { alarmAckParams, alarmAckRequest, alarmOut } from '../../shared/contracts/alarm.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/** Alarm actions (the alarm list is GET /plants/:plantId/alarms in plants.routes.ts). */
export function alarmsRoutes(ctx: AppContext): RouteDef[] {
  const { alarms } = services(ctx);
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
      handler: ({ params, body, principal }) => alarms.acknowledge(principal, params.plantId, params.alarmId, body.comment),
    }),
  ];
}
