import tailwindcss from '@tailwindcss/vite';
import react from '@vitejs/plugin-react';
import { defineConfig } from 'vite';

// `npm run dev` (scripts/dev.ts): Vite on 5173 with /api proxied to the API server on PORT
// (default 3000, as server/config.ts), so the monitor calls the API on its own origin.
const apiPort = Number(process.env.PORT ?? 3000);

export default defineConfig({
  plugins: [react(), tailwindcss()],
  build: { outDir: 'dist', sourcemap: false, manifest: true, chunkSizeWarningLimit: 900 },
  server: {
    host: '127.0.0.1',
    port: 5173,
    // A taken port is an error, not a silent move to 5174 that the banner would not show.
    strictPort: true,
    // The data folder (PostgreSQL's files, logs, spool) and the build output are not sources.
    watch: { ignored: ['**/.data/**', '**/dist/**', '**/tests/**'] },
    proxy: { '/api': { target: `http://127.0.0.1:${apiPort}`, changeOrigin: false } },
  },
});
