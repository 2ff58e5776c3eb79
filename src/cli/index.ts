/**
 * Offsetry command line: `offsetry fit | check | plan | upload | pull | status | compensate | --help`. Bad input exits non-zero with a message
 * naming file, line and field; outputs are written only after success.
 */
import { CliError, EXIT_INTERNAL, EXIT_OK, EXIT_USAGE, type Io } from './common';
import { CHECK_USAGE, COMPENSATE_USAGE, FIT_USAGE, PLAN_USAGE, PULL_USAGE, STATUS_USAGE, UPLOAD_USAGE } from './usage';

export const USAGE = `Offsetry — kinematic calibration of robot arms from laser-tracker sessions.

usage: offsetry <command> [options]

commands:
  fit     identify a calibrated geometry from a nominal geometry and a measured session
  check   error statistics of a geometry against a session, without fitting
  plan    suggest joint configurations (a pose plan) for the next session
  upload  send a session file to an Offsetry server
  pull    download a unit's current approved parameter set from the server
  status  a unit's current set, open fits and reviews, open drift alerts
  compensate  correct a robot program for a calibrated geometry (inverse kinematics)

${FIT_USAGE}

${CHECK_USAGE}

${PLAN_USAGE}

${UPLOAD_USAGE}

${PULL_USAGE}

${STATUS_USAGE}

${COMPENSATE_USAGE}

Exit status: 0 success, 1 bad input (nothing written), 2 bad usage, 3 internal error,
4 the server refused the token or its roles, 5 the server is unreachable or failed (try again),
6 nothing to pull (no approved parameter set), 7 the fit was written but judged implausible.`;

type Run = (args: string[], io: Io) => Promise<number>;
// Loaded on demand: a command pulls in only the engine modules it uses.
const commands: Record<string, { load: () => Promise<Run>; usage: string }> = {
  fit: { load: async () => (await import('./fit')).runFit, usage: FIT_USAGE },
  check: { load: async () => (await import('./check')).runCheck, usage: CHECK_USAGE },
  plan: { load: async () => (await import('./plan')).runPlan, usage: PLAN_USAGE },
  upload: { load: async () => (await import('./upload')).runUpload, usage: UPLOAD_USAGE },
  pull: { load: async () => (await import('./pull')).runPull, usage: PULL_USAGE },
  status: { load: async () => (await import('./status')).runStatus, usage: STATUS_USAGE },
  compensate: { load: async () => (await import('./compensate')).runCompensate, usage: COMPENSATE_USAGE },
};

const consoleIo: Io = { out: (l) => process.stdout.write(l + '\n'), err: (l) => process.stderr.write(l + '\n') };

export async function main(argv: string[], io: Io = consoleIo): Promise<number> {
  const [name, ...rest] = argv;
  if (name === undefined || name === '--help' || name === '-h' || name === 'help') {
    io.out(USAGE);
    return name === undefined ? EXIT_USAGE : EXIT_OK;
  }
  const cmd = commands[name];
  if (!cmd) {
    io.err(`offsetry: unknown command "${name}" (expected ${Object.keys(commands).join(', ')}; see offsetry --help)`);
    return EXIT_USAGE;
  }
  if (rest.includes('--help') || rest.includes('-h')) {
    io.out(cmd.usage);
    return EXIT_OK;
  }
  try {
    const run = await cmd.load();
    return await run(rest, io);
  } catch (e) {
    if (e instanceof CliError) {
      io.err(`offsetry ${name}: ${e.message}`);
      return e.exitCode;
    }
    io.err(`offsetry ${name}: internal error: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}`);
    return EXIT_INTERNAL;
  }
}
