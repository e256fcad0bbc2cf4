import { defineConfig } from 'drizzle-kit';

// `samples` (partitioned by day) lives in a custom SQL migration; it is not in this list.
export default defineConfig({
  dialect: 'postgresql',
  schema: ['./server/db/schema/auth.ts', './server/db/schema/plant.ts', './server/db/schema/wiring.ts', './server/db/schema/process.ts', './server/db/schema/mail.ts', './server/db/schema/ingest.ts', './server/db/schema/history.ts'],
  out: './drizzle',
  dbCredentials: { url: process.env.DATABASE_URL ?? 'postgres://localhost:54329/flocstream' },
});
