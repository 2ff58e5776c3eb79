#!/usr/bin/env node
// `npm run worker`: starts the fit worker (scripts/worker.ts) in this very process with tsx's loader, so a
// supervisor's SIGTERM reaches the worker itself — no relaying parent process in between.
import { register } from 'tsx/esm/api';

register();
await import(new URL('./worker.ts', import.meta.url).href);
