import { SAFETY_CAUTION } from '../lib/shared/safety';

/** The safety caution for islands (approval and export flows). */
export default function SafetyNotice() {
  return (
    <aside className="notice notice-attention flex gap-3" role="note" aria-label="Safety caution" data-safety-caution>
      <span aria-hidden="true" className="text-xl leading-none text-attention">▲</span>
      <p><strong>Safety.</strong> {SAFETY_CAUTION}</p>
    </aside>
  );
}
