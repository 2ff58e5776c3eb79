// Entry of the worker threads of src/lib/server/engine-runner.ts (piscina loads it in each thread): registers
// tsx's loader in the thread, then loads the TypeScript task code, so the source tree runs both under tsx
// (scripts/worker.ts) and inside the built app. A thread that cannot load it answers every task with
// { noStart }, and the runner then runs the work in-process.
let handler;
try {
  const { register } = await import('tsx/esm/api');
  register();
  handler = (await import('./pool-tasks.ts')).runInThread;
} catch (err) {
  const message = String((err && err.stack) || err);
  handler = () => ({ noStart: message });
}
export default handler;
