import js from '@eslint/js';
import tseslint from 'typescript-eslint';

// Import boundaries (STYLE.md, convention 0 and 1): shared/ is pure; the monitor talks HTTP only;
// the simulator speaks MQTT and OPC UA like a real plant and imports neither server nor ingest.
const ioLibraries = ['express', 'pg', 'pg-copy-streams', 'drizzle-orm', 'drizzle-orm/*', 'mqtt', 'aedes', 'node-opcua', 'node-opcua-*', 'react', 'react-dom', 'bullmq', 'nodemailer', 'smtp-server', 'pino', 'node:*', 'fs', 'net', 'http', 'child_process'];

export default tseslint.config(
  { ignores: ['dist/**', 'node_modules/**', '.data/**', 'drizzle/**', 'tests/e2e/screenshots/**'] },
  js.configs.recommended,
  ...tseslint.configs.recommended,
  {
    languageOptions: { ecmaVersion: 2023, sourceType: 'module' },
    rules: {
      '@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_' }],
      '@typescript-eslint/no-explicit-any': 'error',
      'no-restricted-syntax': ['error', { selector: "MemberExpression[object.name='process'][property.name='env']", message: 'read the environment only in server/config.ts or ingest/config.ts (STYLE.md rule 8)' }],
    },
  },
  {
    files: ['shared/**/*.ts'],
    rules: {
      'no-restricted-imports': ['error', { patterns: [{ group: ioLibraries, message: 'shared/ is pure: no I/O libraries' }, { group: ['**/server/**', '**/ingest/**', '**/src/**', '**/simulators/**'], message: 'shared/ imports nothing of the product' }] }],
    },
  },
  {
    files: ['src/**/*.ts', 'src/**/*.tsx'],
    rules: {
      'no-restricted-imports': ['error', { patterns: [{ group: ['**/server/**', '**/ingest/**', '**/simulators/**'], message: 'the monitor talks HTTP to the server; it imports nothing from server/, ingest/ or simulators/' }] }],
    },
  },
  {
    files: ['simulators/**/*.ts'],
    rules: {
      'no-restricted-imports': ['error', { patterns: [{ group: ['**/server/**', '**/ingest/**'], message: 'the simulator is a plant: it speaks MQTT and OPC UA, it does not import the product' }] }],
    },
  },
  {
    // Ingest shares nothing with the API but PostgreSQL and the broker, so it runs on any host.
    files: ['ingest/**/*.ts'],
    rules: {
      'no-restricted-imports': [
        'error',
        { patterns: [{ group: ['**/src/**', '**/simulators/**'], message: 'ingest does not import the monitor or the simulator' }, { group: ['**/server/**'], message: 'ingest imports nothing from server/: it talks to the API through PostgreSQL (rows, LISTEN/NOTIFY)' }] },
      ],
    },
  },
  {
    // One module per protocol, used by both: the API's wiring test and browse reuse ingest's
    // protocol clients (one OPC UA client certificate), and nothing else of ingest; the historian
    // import writes samples with ingest's binary COPY encoder (one encoding of a sample row).
    files: ['server/**/*.ts'],
    rules: {
      'no-restricted-imports': [
        'error',
        {
          patterns: [
            {
              regex: '(^|/)ingest/(?!(opcua/opcua-client|mqtt/mqtt-connection|sink/copy-binary|pipeline/types)\\.ts$)',
              message: 'server/ may import only ingest\'s protocol modules (ingest/opcua/opcua-client.ts, ingest/mqtt/mqtt-connection.ts), the COPY encoder ingest/sink/copy-binary.ts and its Sample type',
            },
          ],
        },
      ],
    },
  },
  {
    files: ['server/config.ts', 'ingest/config.ts', 'vite.config.ts', 'drizzle.config.ts', 'scripts/**/*.ts', 'tests/**/*.ts'],
    rules: { 'no-restricted-syntax': 'off' },
  },
);
