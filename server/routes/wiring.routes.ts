import express from 'express';
import { z } from 'zod';
import { plantParams } from '../../shared/contracts/plant-api.ts';
import {
  browseOut,
  browseQuery,
  connectionTestOut,
  discoveryOut,
  mappingParams,
  mappingPut,
  mappingPutOut,
  sourceCreate,
  sourceDeleteQuery,
  sourceOut,
  sourceParams,
  sourcePatch,
  sourcesResponse,
  tagConfigOut,
  tagCreate,
  tagIdParams,
  tagImportOut,
  tagImportQuery,
  tagPatch,
  tagsConfigResponse,
} from '../../shared/contracts/wiring.ts';
import { services, type AppContext } from '../app-context.ts';
import { defineRoute, type RouteDef } from '../http/route.ts';

/** Largest tag-list upload [bytes]. */
export const TAG_CSV_MAX_BYTES = 1 << 20;
const csvBody = express.text({ type: ['text/csv', 'text/plain', 'application/csv'], limit: TAG_CSV_MAX_BYTES });

const deleted = z.object({ deleted: z.literal(true), id: z.number().int() });

/**
 * Wiring (DESIGN §4, §5): sources, tags and the signal map, integrator and up; every write
 * audited; source passwords are write-only.
 */
export function wiringRoutes(ctx: AppContext): RouteDef[] {
  const { wiring } = services(ctx);
  const common = { role: 'integrator', tag: 'wiring' } as const;
  return [
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/sources',
      summary: 'Sources of a plant (MQTT brokers, OPC UA endpoints); passwords are never returned, hasSecret says whether one is stored',
      params: plantParams,
      response: sourcesResponse,
      handler: ({ params, principal }) => wiring.listSources(principal, params.plantId),
    }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/plants/:plantId/sources',
      summary:
        'Add a source: kind mqtt (url mqtt://, mqtts://, ws:// or wss://; options topics, protocolVersion 4|5|auto, clientId, keepalive_s) or opcua (url opc.tcp://; options securityMode, securityPolicy, publishingInterval_ms, samplingInterval_ms, acceptUnknownServerCertificate); password is write-only; name unique in the plant (409)',
      status: 201,
      params: plantParams,
      body: sourceCreate,
      response: sourceOut,
      handler: ({ params, body, principal }) => wiring.createSource(principal, params.plantId, body),
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/sources/:sourceId',
      summary: 'One source with its tag count; the password is never returned (hasSecret)',
      params: sourceParams,
      response: sourceOut,
      handler: ({ params, principal }) => wiring.getSource(principal, params.sourceId),
    }),
    defineRoute({
      ...common,
      method: 'patch',
      path: '/sources/:sourceId',
      summary: 'Change a source (not its kind); url and options are checked against its kind; password null removes it, left out keeps it',
      params: sourceParams,
      body: sourcePatch,
      response: sourceOut,
      handler: ({ params, body, principal }) => wiring.updateSource(principal, params.sourceId, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/sources/:sourceId',
      summary: 'Delete a source; 409 while it has tags unless ?force=1 (then its tags and their mappings go too; stored samples stay)',
      params: sourceParams,
      query: sourceDeleteQuery,
      response: deleted.extend({ tagsDeleted: z.number().int() }),
      handler: ({ params, query, principal }) => wiring.deleteSource(principal, params.sourceId, query.force === '1'),
    }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/sources/:sourceId/test',
      summary: 'Test the connection with the stored settings: MQTT CONNECT/CONNACK within 5 s, OPC UA secure channel and session within 8 s; answers ok:false with the error (still 200) when the far end fails',
      params: sourceParams,
      response: connectionTestOut,
      handler: ({ params, principal }) => wiring.testSource(principal, params.sourceId),
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/sources/:sourceId/browse',
      summary: 'OPC UA source: children of a node (default the Objects folder) with node class, whether they have children and, for variables, the data type; 502 when the endpoint cannot be reached',
      params: sourceParams,
      query: browseQuery,
      response: browseOut,
      handler: ({ params, query, principal }) => wiring.browse(principal, params.sourceId, query.nodeId),
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/sources/:sourceId/discovery',
      summary: 'MQTT source: topics ingest has seen with their last payload (first 256 characters), count and mapped tag; empty with a note until ingest has written the list',
      params: sourceParams,
      response: discoveryOut,
      handler: ({ params, principal }) => wiring.discovery(principal, params.sourceId),
    }),
    defineRoute({
      ...common,
      method: 'get',
      path: '/plants/:plantId/tags/config',
      summary: 'Tag configuration of a plant (address, scaling, deadband, expected period, range, sampling interval, mapped signals); live values are GET /plants/{plantId}/tags',
      params: plantParams,
      response: tagsConfigResponse,
      handler: ({ params, principal }) => wiring.listTags(principal, params.plantId),
    }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/plants/:plantId/tags',
      summary: 'Add a tag: source of this plant, address fitting its kind (MQTT topic or filter, OPC UA NodeId), unit, scaling raw × scaleGain + scaleOffset, deadband, expectedPeriod_s, rangeLow < rangeHigh; name unique in the plant and address unique per source (409)',
      status: 201,
      params: plantParams,
      body: tagCreate,
      response: tagConfigOut,
      handler: ({ params, body, principal }) => wiring.createTag(principal, params.plantId, body),
    }),
    defineRoute({
      ...common,
      method: 'patch',
      path: '/tags/:tagId',
      summary: 'Change a tag; the same rules as adding one, checked against the resulting tag',
      params: tagIdParams,
      body: tagPatch,
      response: tagConfigOut,
      handler: ({ params, body, principal }) => wiring.updateTag(principal, params.tagId, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/tags/:tagId',
      summary: 'Delete a tag and its signal mappings (stored samples stay)',
      params: tagIdParams,
      response: deleted,
      handler: ({ params, principal }) => wiring.deleteTag(principal, params.tagId),
    }),
    defineRoute({
      ...common,
      method: 'post',
      path: '/plants/:plantId/tags/import',
      summary:
        'Upload a tag list as CSV (Content-Type: text/csv, RFC 4180, header row; columns name, source (source name), address, unit, description, scale_gain, scale_offset, deadband, expected_period_s, range_low, range_high, signal, target (basin/clarifier/pump code); at most 1 MiB, 5000 rows). ?dryRun=1 answers the preview and the row errors without storing; otherwise all or nothing: any invalid row → 422 listing line.<n>.<column> (the header is line 1)',
      status: 201,
      params: plantParams,
      query: tagImportQuery,
      before: [csvBody],
      response: tagImportOut,
      handler: async ({ params, query, principal, req, res }) => {
        const dryRun = query.dryRun === '1';
        const out = await wiring.importCsv(principal, params.plantId, typeof req.body === 'string' ? req.body : undefined, dryRun);
        if (dryRun) res.status(200);
        else res.status(201);
        res.json(out);
      },
    }),
    defineRoute({
      ...common,
      method: 'put',
      path: '/plants/:plantId/signal-map',
      summary:
        'Map a process signal of a target to a tag, replacing the tag mapped to that signal and target before (answered as replacedTagId); the signal kind must fit the target type (plant.* → plant, basin.* → basin, clarifier.* → clarifier, pump.* → pump); target by targetCode or targetId',
      params: plantParams,
      body: mappingPut,
      response: mappingPutOut,
      handler: ({ params, body, principal }) => wiring.putMapping(principal, params.plantId, body),
    }),
    defineRoute({
      ...common,
      method: 'delete',
      path: '/signal-map/:id',
      summary: 'Remove one signal mapping',
      params: mappingParams,
      response: deleted,
      handler: ({ params, principal }) => wiring.deleteMapping(principal, params.id),
    }),
  ];
}
