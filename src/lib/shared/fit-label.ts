/**
 * How screens name a fit: its start time to the second (UTC) and the first six characters of its id, so two
 * fits started in the same minute — or the same second — never share a label in a selector or table.
 */
export const stampSeconds = (d: Date | string | null | undefined) =>
  d ? new Date(d).toISOString().slice(0, 19).replace('T', ' ') + ' UTC' : '—';

export const fitShortId = (id: string) => `#${id.slice(0, 6)}`;

export const fitLabel = (createdAt: Date | string, id: string) => `${stampSeconds(createdAt)} ${fitShortId(id)}`;
