/** Every API URL the monitor uses, built here and nowhere else. */
const v1 = '/api/v1';
export const paths = {
  health: '/api/health',
  login: `${v1}/auth/login`,
  logout: `${v1}/auth/logout`,
  me: `${v1}/auth/me`,
  users: `${v1}/users`,
  user: (id: number) => `${v1}/users/${id}`,
  tokens: `${v1}/tokens`,
  token: (id: number) => `${v1}/tokens/${id}`,
  plants: `${v1}/plants`,
  plant: (id: number) => `${v1}/plants/${id}`,
  plantTags: (id: number) => `${v1}/plants/${id}/tags`,
  tagSamples: (plantId: number, tagId: number) => `${v1}/plants/${plantId}/tags/${tagId}/samples`,
  balanceLive: (id: number) => `${v1}/plants/${id}/balance/live`,
  balanceHistory: (id: number) => `${v1}/plants/${id}/balance/history`,
  alarms: (id: number) => `${v1}/plants/${id}/alarms`,
  alarmAck: (plantId: number, alarmId: number) => `${v1}/plants/${plantId}/alarms/${alarmId}/ack`,
  alarmShelve: (alarmId: number) => `${v1}/alarms/${alarmId}/shelve`,
  alarmUnshelve: (alarmId: number) => `${v1}/alarms/${alarmId}/unshelve`,
  labResults: (id: number) => `${v1}/plants/${id}/lab-results`,
  labImport: (id: number) => `${v1}/plants/${id}/lab-results/import`,
  stream: (id: number) => `${v1}/plants/${id}/stream`,
  settings: `${v1}/settings`,
  outbox: `${v1}/outbox`,
  outboxMessage: (id: number) => `${v1}/outbox/${id}`,
  // wiring (integrator+)
  sources: (plantId: number) => `${v1}/plants/${plantId}/sources`,
  source: (id: number) => `${v1}/sources/${id}`,
  sourceTest: (id: number) => `${v1}/sources/${id}/test`,
  sourceBrowse: (id: number) => `${v1}/sources/${id}/browse`,
  sourceDiscovery: (id: number) => `${v1}/sources/${id}/discovery`,
  tagsConfig: (plantId: number) => `${v1}/plants/${plantId}/tags/config`,
  tag: (id: number) => `${v1}/tags/${id}`,
  tagsImport: (plantId: number) => `${v1}/plants/${plantId}/tags/import`,
  signalMap: (plantId: number) => `${v1}/plants/${plantId}/signal-map`,
  signalMapping: (id: number) => `${v1}/signal-map/${id}`,
  ingestStatus: `${v1}/ingest/status`,
  historyImport: (plantId: number) => `${v1}/plants/${plantId}/history`,
  job: (id: number) => `${v1}/jobs/${id}`,
  // plant setup (integrator+)
  plantModel: (plantId: number) => `${v1}/plants/${plantId}/model`,
  plantConfig: (plantId: number) => `${v1}/plants/${plantId}/config`,
  plantUnits: (plantId: number, kind: 'trains' | 'basins' | 'clarifiers' | 'pumps') => `${v1}/plants/${plantId}/${kind}`,
  plantUnit: (plantId: number, kind: 'trains' | 'basins' | 'clarifiers' | 'pumps', id: number) => `${v1}/plants/${plantId}/${kind}/${id}`,
  /** Adds a query string, leaving out undefined values. */
  withQuery: (url: string, q: Record<string, string | number | undefined>) => {
    const sp = new URLSearchParams();
    for (const [k, v] of Object.entries(q)) if (v !== undefined) sp.set(k, String(v));
    const s = sp.toString();
    return s ? `${url}?${s}` : url;
  },
  calc: (name: 'storm' | 'state-point' | 'settler' | 'srt' | 'svi') => `${v1}/calc/${name}`,
};
