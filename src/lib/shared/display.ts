/** Display helpers the server and the islands share (pure, no imports). */

/** A size in bytes as people read it: "812 bytes", "9.8 KiB", "5 MiB" (one decimal, none when it is .0). */
export function formatBytes(b: number): string {
  if (b >= 1024 * 1024) return `${+(b / (1024 * 1024)).toFixed(1)} MiB`;
  if (b >= 1024) return `${+(b / 1024).toFixed(1)} KiB`;
  return `${b} bytes`;
}

/** The page of one measurement session. */
export const sessionUrl = (id: string) => `/sessions/${id}`;
