import type { z } from 'zod';
import {
  dynamicSrtRequest,
  dynamicSrtResponse,
  settlerRequest,
  settlerResponse,
  srtRequest,
  srtResponse,
  statePointRequest,
  statePointResponse,
  stormRequest,
  stormResponse,
  stormTimelineRequest,
  stormTimelineResponse,
  sviRequest,
  sviResponse,
} from '../../shared/contracts/calc.ts';
import { calcDynamicSrt, calcSrt, calcStatePoint, calcStorm, calcStormTimeline, calcSvi } from '../../shared/domain/calculators.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/**
 * Stateless calculators: the same shared/domain code the live balance engine runs. Any signed-in
 * role or token may call them; they read nothing and write nothing, so they are not audited.
 * The heavy ones run in the worker pool with a budget (`services(ctx).calc`, calc.service.ts).
 */
export function calcRoutes(ctx: AppContext): RouteDef[] {
  const offThread = services(ctx).calc;
  const calc = <Req extends z.ZodType, Res extends z.ZodType>(path: string, summary: string, body: Req, response: Res, fn: (r: z.output<Req>) => z.input<Res> | Promise<z.input<Res>>): RouteDef =>
    defineRoute({
      method: 'post',
      path: `/calc/${path}`,
      role: 'analyst',
      tag: 'calculators',
      summary,
      body,
      response,
      handler: ({ body }) => fn(body),
    });
  return [
    calc('storm', 'Storm projection: RAS concentration needed, equilibrium MLSS with the return flow held, sludge moved to the clarifiers, checks', stormRequest, stormResponse, calcStorm),
    calc('state-point', 'State point analysis (solids-flux theory with Vesilind settling)', statePointRequest, statePointResponse, calcStatePoint),
    calc('settler', 'Layered 1-D settler steady state (Takács double-exponential settling, BSM1 defaults)', settlerRequest, settlerResponse, (b) => offThread.run('settler', b)),
    calc('srt', 'Sludge age (total and aeration-only) and the WAS flow for a target SRT', srtRequest, srtResponse, calcSrt),
    calc('svi', 'Settleability index: SVI, DSVI (diluted) or SSVI', sviRequest, sviResponse, calcSvi),
    calc('storm-timeline', 'Storm projection in time over a hydrograph: basin MLSS, clarifier mass, blanket against the depth, checks with the time they first fail', stormTimelineRequest, stormTimelineResponse, calcStormTimeline),
    calc('dynamic-srt', 'Dynamic SRT of a series: the age balance d(M·θ)/dt = M − W·θ, inputs linear between points', dynamicSrtRequest, dynamicSrtResponse, calcDynamicSrt),
  ];
}
