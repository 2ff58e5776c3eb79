// @ts-check
import { defineConfig } from 'astro/config';
import node from '@astrojs/node';
import react from '@astrojs/react';
import tailwindcss from '@tailwindcss/vite';
import auth from 'auth-astro';

// Hosts the server answers as (Astro only trusts the Host header for these). Any port is accepted so
// tests can run instances on free ports; production adds its own names through OFFSETRY_ALLOWED_HOSTS at
// build time.
const extraHosts = (process.env.OFFSETRY_ALLOWED_HOSTS ?? '')
  .split(',')
  .map((h) => h.trim())
  .filter(Boolean)
  .map((hostname) => ({ hostname }));

export default defineConfig({
  output: 'server',
  adapter: node({ mode: 'standalone' }),
  // scripts/test.mjs builds into its own throw-away folder so parallel runs never share dist/.
  outDir: process.env.OFFSETRY_OUT_DIR ?? './dist',
  integrations: [react(), auth({ configFile: './auth.config.ts' })],
  security: {
    // The same-origin check for state-changing requests lives in src/middleware.ts: it is configured at run
    // time (PUBLIC_BASE_URL) and exempts bearer-token calls, which carry no ambient credentials.
    checkOrigin: false,
    allowedDomains: [{ hostname: '127.0.0.1' }, { hostname: 'localhost' }, ...extraHosts],
  },
  server: { host: '127.0.0.1', port: 4321 },
  devToolbar: { enabled: false },
  vite: {
    plugins: [tailwindcss()],
    ssr: { external: ['pg-boss', 'piscina', 'postgres', 's3rver', 'smtp-server', 'nodemailer', 'pdfkit'] },
  },
});
