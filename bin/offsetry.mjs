#!/usr/bin/env node
// Launcher: registers tsx's loader so the TypeScript command line runs without a build step.
import { register } from 'tsx/esm/api';

register();
const { main } = await import(new URL('../src/cli/index.ts', import.meta.url).href);
process.exitCode = await main(process.argv.slice(2));
