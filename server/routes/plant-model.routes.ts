import type { Request } from 'express';
import { z } from 'zod';
import { configPutOut, configPutQuery, plantConfig, plantConfigCreate, plantCreateQuery, type PlantConfig, type PlantConfigCreate } from '../../shared/contracts/plant-config.ts';
import {
  basinCreate,
  basinOut,
  basinParams,
  basinPatch,
  clarifierCreate,
  clarifierOut,
  clarifierParams,
  clarifierPatch,
  deletedOut,
  modelQuery,
  plantCreate,
  plantDeleteQuery,
  plantModelOut,
  plantOut,
  plantParams,
  plantPatch,
  pumpCreate,
  pumpOut,
  pumpParams,
  pumpPatch,
  trainCreate,
  trainOut,
  trainParams,
  trainPatch,
  type BasinCreate,
  type BasinPatch,
  type ClarifierCreate,
  type ClarifierPatch,
  type PlantCreate,
  type PlantPatch,
  type PumpCreate,
  type PumpPatch,
  type TrainCreate,
  type TrainPatch,
} from '../../shared/contracts/plant-model.ts';
import type { AppContext } from '../app-context.ts';
import type { Principal } from '../auth/principal.ts';
import type { RouteDef } from '../http/route.ts';
import { plantModelRepository } from '../repositories/plant-model.repository.ts';
import { plantConfigService } from '../services/plant-config.service.ts';
import { plantModelService } from '../services/plant-model.service.ts';

/**
 * Plant setup (integrator and up): plants, their trains, aeration basins, secondary clarifiers
 * and pumps with effective-dated geometry, and the plant configuration document. Every route
 * under /plants/:plantId answers 403 to a token scoped to other plants. Writes are audited.
 */
export function plantModelRoutes(ctx: AppContext): RouteDef[] {
  const repo = plantModelRepository(ctx.db.db);
  const model = plantModelService(repo);
  const config = plantConfigService(repo);
  const w = { role: 'integrator' as const, tag: 'plant setup' };
  const who = (req: Request) => req.principal as Principal;
  const body = <T>(req: Request) => req.valid.body as T;
  const params = <T>(req: Request) => req.valid.params as T;
  const pid = (req: Request) => params<{ plantId: number }>(req).plantId;

  return [
    {
      ...w,
      method: 'post',
      path: '/plants',
      status: 201,
      summary:
        'Create a plant: either {code, name, timezone, peakFlow_m3h?, unitSystem?}, or a whole plant from a configuration document (formatVersion 1; ids ignored; code and name overridable by ?code=&name= or top-level fields; sources needing a secret are created disabled until PATCH /sources/:sourceId sets it)',
      query: plantCreateQuery,
      body: z.discriminatedUnion('formatVersion', [plantConfigCreate, plantCreate]),
      response: plantOut,
      handler: (req: Request) => {
        const b = body<PlantCreate | PlantConfigCreate>(req);
        if (b.formatVersion === undefined) return model.create(who(req), b);
        const q = req.valid.query as { code?: string; name?: string };
        const { code, name, ...doc } = b;
        return config.create(who(req), doc, { code: q.code ?? code, name: q.name ?? name });
      },
    },
    {
      ...w,
      method: 'patch',
      path: '/plants/:plantId',
      summary: 'Change a plant (code, name, timezone, peak flow, unit system) or retire it (retiredAt: history kept, no more balances)',
      params: plantParams,
      body: plantPatch,
      response: plantOut,
      handler: (req: Request) => model.patch(who(req), pid(req), body<PlantPatch>(req)),
    },
    {
      ...w,
      method: 'delete',
      path: '/plants/:plantId',
      summary: 'Delete a plant with everything it holds; 409 while samples exist unless ?force=1 (retire it to keep its history)',
      params: plantParams,
      query: plantDeleteQuery,
      response: deletedOut,
      handler: (req: Request) => model.remove(who(req), pid(req), (req.valid.query as { force?: string }).force === '1'),
    },
    {
      role: 'analyst',
      tag: 'plant setup',
      method: 'get',
      path: '/plants/:plantId/model',
      summary: 'The process model: trains, basins, clarifiers, pumps with the geometry valid at ?at= (default now; inService false when out of service then) and each unit’s geometry history',
      params: plantParams,
      query: modelQuery,
      response: plantModelOut,
      handler: (req: Request) => model.model(who(req), pid(req), (req.valid.query as { at?: string }).at),
    },
    {
      ...w,
      method: 'post',
      path: '/plants/:plantId/trains',
      status: 201,
      summary: 'Add a treatment train',
      params: plantParams,
      body: trainCreate,
      response: trainOut,
      handler: (req: Request) => model.createTrain(who(req), pid(req), body<TrainCreate>(req)),
    },
    {
      ...w,
      method: 'patch',
      path: '/plants/:plantId/trains/:trainId',
      summary: 'Rename or recode a train',
      params: trainParams,
      body: trainPatch,
      response: trainOut,
      handler: (req: Request) => model.patchTrain(who(req), pid(req), params<{ trainId: number }>(req).trainId, body<TrainPatch>(req)),
    },
    {
      ...w,
      method: 'delete',
      path: '/plants/:plantId/trains/:trainId',
      summary: 'Delete a train with its units, their geometry history and signal mappings',
      params: trainParams,
      response: deletedOut,
      handler: (req: Request) => model.removeTrain(who(req), pid(req), params<{ trainId: number }>(req).trainId),
    },
    {
      ...w,
      method: 'post',
      path: '/plants/:plantId/basins',
      status: 201,
      summary: 'Add an aeration basin (volume_m3 > 0, aeratedFraction 0–1, sideWaterDepth_m?) effective from effectiveFrom (default now; its first geometry also holds for all earlier times)',
      params: plantParams,
      body: basinCreate,
      response: basinOut,
      handler: (req: Request) => model.createBasin(who(req), pid(req), body<BasinCreate>(req)),
    },
    {
      ...w,
      method: 'patch',
      path: '/plants/:plantId/basins/:basinId',
      summary: 'Edit a basin; geometry fields and inService make a new version from effectiveFrom (default now), earlier balances keep the old one',
      params: basinParams,
      body: basinPatch,
      response: basinOut,
      handler: (req: Request) => model.patchBasin(who(req), pid(req), params<{ basinId: number }>(req).basinId, body<BasinPatch>(req)),
    },
    {
      ...w,
      method: 'delete',
      path: '/plants/:plantId/basins/:basinId',
      summary: 'Delete a basin with its geometry history and mappings (to keep history, set inService false instead)',
      params: basinParams,
      response: deletedOut,
      handler: (req: Request) => model.removeUnit(who(req), pid(req), 'basin', params<{ basinId: number }>(req).basinId),
    },
    {
      ...w,
      method: 'post',
      path: '/plants/:plantId/clarifiers',
      status: 201,
      summary: 'Add a secondary clarifier (area_m2 > 0 and sideWaterDepth_m required, feedDepth_m?, count) effective from effectiveFrom (default now)',
      params: plantParams,
      body: clarifierCreate,
      response: clarifierOut,
      handler: (req: Request) => model.createClarifier(who(req), pid(req), body<ClarifierCreate>(req)),
    },
    {
      ...w,
      method: 'patch',
      path: '/plants/:plantId/clarifiers/:clarifierId',
      summary: 'Edit a clarifier; geometry and inService are effective-dated (out of service for a month = inService false from t1, true from t2)',
      params: clarifierParams,
      body: clarifierPatch,
      response: clarifierOut,
      handler: (req: Request) => model.patchClarifier(who(req), pid(req), params<{ clarifierId: number }>(req).clarifierId, body<ClarifierPatch>(req)),
    },
    {
      ...w,
      method: 'delete',
      path: '/plants/:plantId/clarifiers/:clarifierId',
      summary: 'Delete a clarifier with its geometry history and mappings',
      params: clarifierParams,
      response: deletedOut,
      handler: (req: Request) => model.removeUnit(who(req), pid(req), 'clarifier', params<{ clarifierId: number }>(req).clarifierId),
    },
    {
      ...w,
      method: 'post',
      path: '/plants/:plantId/pumps',
      status: 201,
      summary: 'Add a RAS or WAS pump (capacity_m3h ≥ 0) serving a clarifier (clarifierId, same plant) or a train (trainId)',
      params: plantParams,
      body: pumpCreate,
      response: pumpOut,
      handler: (req: Request) => model.createPump(who(req), pid(req), body<PumpCreate>(req)),
    },
    {
      ...w,
      method: 'patch',
      path: '/plants/:plantId/pumps/:pumpId',
      summary: 'Edit a pump; capacity and inService are effective-dated',
      params: pumpParams,
      body: pumpPatch,
      response: pumpOut,
      handler: (req: Request) => model.patchPump(who(req), pid(req), params<{ pumpId: number }>(req).pumpId, body<PumpPatch>(req)),
    },
    {
      ...w,
      method: 'delete',
      path: '/plants/:plantId/pumps/:pumpId',
      summary: 'Delete a pump with its geometry history and mappings',
      params: pumpParams,
      response: deletedOut,
      handler: (req: Request) => model.removeUnit(who(req), pid(req), 'pump', params<{ pumpId: number }>(req).pumpId),
    },
    {
      ...w,
      method: 'get',
      path: '/plants/:plantId/config',
      summary: 'The plant as one configuration document (formatVersion 1): plant, model with geometry history, own settings, sources (secrets replaced by {secretRequired: true}), tags, signal map; units by code',
      params: plantParams,
      response: plantConfig,
      handler: (req: Request) => config.export(who(req), pid(req)),
    },
    {
      ...w,
      method: 'put',
      path: '/plants/:plantId/config',
      summary: 'Make the plant match a configuration document: ?dryRun=1 lists the changes [{op: add|update|remove, path, before?, after?}]; without it they are applied in one transaction (audited)',
      params: plantParams,
      query: configPutQuery,
      body: plantConfig,
      response: configPutOut,
      handler: (req: Request) => config.put(who(req), pid(req), body<PlantConfig>(req), (req.valid.query as { dryRun?: string }).dryRun === '1'),
    },
  ];
}
