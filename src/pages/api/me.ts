import type { APIRoute } from 'astro';
import { json } from '../../lib/server/http';

export const GET: APIRoute = ({ locals }) => json({ user: locals.user });
