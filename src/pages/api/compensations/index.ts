import type { APIRoute } from 'astro';
import { listCompensations } from '../../../lib/server/compensations';
import { json } from '../../../lib/server/http';

/** Every unit's compensated programs, newest first (the latest 100). */
export const GET: APIRoute = async () => json({ compensations: await listCompensations(undefined, 100) });
