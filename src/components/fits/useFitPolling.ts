import { useEffect, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import type { FitView } from '../../lib/shared/fit-view';

/** True while the fit waits for a worker or runs. */
export const isWaiting = (fit: Pick<FitView, 'state'>) => fit.state === 'queued' || fit.state === 'running';

/**
 * The fit as the page shows it: starts from the server-rendered value and, while the fit is queued or
 * running, asks GET /api/fits/{id} again (first after 0.7 s, then every second) until it has finished.
 * `reload` fetches it once more on demand (after a submit, say).
 */
export function useFitPolling(initial: FitView): { fit: FitView; reload: () => Promise<void> } {
  const [fit, setFit] = useState<FitView>(initial);
  const waiting = isWaiting(fit);
  useEffect(() => {
    if (!waiting) return;
    let stop = false;
    const tick = async () => {
      const res = await api<{ fit: FitView }>(`/api/fits/${fit.id}`);
      if (stop) return;
      if (res.data) setFit(res.data.fit);
      timer = setTimeout(tick, 1000);
    };
    let timer = setTimeout(tick, 700);
    return () => {
      stop = true;
      clearTimeout(timer);
    };
  }, [waiting, fit.id]);

  async function reload() {
    const again = await api<{ fit: FitView }>(`/api/fits/${fit.id}`);
    if (again.data) setFit(again.data.fit);
  }
  return { fit, reload };
}
