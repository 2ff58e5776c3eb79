import { startMailSender } from './mail';

let started = false;

/** Background loops of an app instance (mail sender; the fit worker joins here). Idempotent. */
export function startBackground() {
  if (started) return;
  started = true;
  if (process.env.VITEST) return;
  startMailSender();
}
