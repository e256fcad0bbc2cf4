export * from './auth.ts';
export * from './plant.ts';
export * from './wiring.ts';
export * from './process.ts';
export * from './samples.ts';
export * from './mail.ts';
export * from './ingest.ts';
export * from './history.ts';
