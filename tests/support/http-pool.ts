/**
 * The connection pool behind every test's `fetch` (a vitest setup file).
 *
 * The app (Node's http.Server) closes a kept-alive connection after 5 s idle and says so in its
 * `Keep-Alive: timeout=5` header; fetch's default pool keeps the socket until 1 s before that. When a loaded
 * full run stalls the test process past that second, the next request goes out on a socket the server has
 * just closed and fails with ECONNRESET. Idle sockets are dropped here after 1 s, four seconds inside the
 * server's limit. The undici package is the library Node's own fetch is built on; `setGlobalDispatcher`
 * is its documented way to configure the pool of the global fetch.
 */
import { Agent, setGlobalDispatcher } from 'undici';

setGlobalDispatcher(new Agent({ keepAliveTimeout: 1000, keepAliveMaxTimeout: 1000 }));
