import { alarmAckParams, alarmAckRequest, alarmIdParams, alarmOut, alarmShelveRequest, alarmSummaryOut, alarmSummaryQuery, alarmUnshelveRequest } from '../../shared/contracts/alarm.ts';
import { plantParams } from '../../shared/contracts/plant-api.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/** Alarm actions and the alarm-rate summary (the alarm list is GET /plants/:plantId/alarms in plants.routes.ts). */
export function alarmsRoutes(ctx: AppContext): RouteDef[] {
  const { alarms, settings } = services(ctx);
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
    defineRoute({
      method: 'get',
      path: '/plants/:plantId/alarms/summary',
      role: 'analyst',
      tag: 'alarms',
      summary: 'Alarms annunciated (and suppressed) per 10 minutes in [from, to) (default the last 6 h), each bucket flagged a flood above setting alarm.flood_per_10min (ISA-18.2 / EEMUA 191 alarm-rate measure)',
      params: plantParams,
      query: alarmSummaryQuery,
      response: alarmSummaryOut,
      handler: async ({ params, query, principal }) => alarms.summary(principal, params.plantId, await settings.effective(params.plantId), query),
    }),
    defineRoute({
      method: 'post',
      path: '/alarms/:alarmId/shelve',
      role: 'operator',
      tag: 'alarms',
      summary: 'Shelve an active alarm for some minutes with a reason (ISA-18.2 shelving, at most 8 h): not annunciated (not mailed) until it expires; audited',
      params: alarmIdParams,
      body: alarmShelveRequest,
      response: alarmOut,
      handler: ({ params, body, principal }) => alarms.shelve(principal, params.alarmId, body.minutes, body.reason),
    }),
    defineRoute({
      method: 'post',
      path: '/alarms/:alarmId/unshelve',
      role: 'operator',
      tag: 'alarms',
      summary: 'End a shelf early: the alarm is annunciated again if still active; audited',
      params: alarmIdParams,
      body: alarmUnshelveRequest,
      response: alarmOut,
      handler: ({ params, body, principal }) => alarms.unshelve(principal, params.alarmId, body.comment),
    }),
  ];
}
