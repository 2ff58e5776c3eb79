import { sql } from 'drizzle-orm';

/** Select this beside a page's columns: the total of the whole filtered list, in the same round trip. */
export const windowTotal = () => sql<number>`count(*) over ()`.mapWith(Number);

/**
 * The total of a paged list read with `windowTotal()`. Only a page past the end has no row to carry it, and
 * then the separate count runs.
 */
export async function pageTotal(rows: readonly { total: number }[], page: number, count: () => Promise<number>): Promise<number> {
  if (rows.length) return rows[0]!.total;
  return page > 1 ? count() : 0;
}
