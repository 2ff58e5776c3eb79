/// <reference path="../.astro/types.d.ts" />

declare namespace App {
  interface Locals {
    /** The signed-in user (session cookie or bearer token), re-read from the database on each request. */
    user?: import('./lib/server/users').CurrentUser;
    /** Correlates a request's log lines and its response (x-request-id). */
    requestId: string;
    /** Set when the request body passed its route's limit while streaming (the answer becomes 413). */
    bodyTooLarge?: number;
  }
}
