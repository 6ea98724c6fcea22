/// <reference types="astro/client" />

declare namespace App {
  interface Locals {
    user: import('./server/auth').SessionData['user'] | null;
    session: import('./server/auth').SessionData['session'] | null;
    memberships: import('./server/laboratories').LabMembership[];
    /** The laboratory named in the URL (/labs/:slug or /api/labs/:slug), once access to it is established. */
    lab: { id: string; slug: string; name: string } | null;
    /** The signed-in person's role in `lab`; null for API-token requests. */
    role: import('./db/schema').Role | null;
    /** Set when the request carries a valid lab-scoped API token instead of a session. */
    viaApiToken: boolean;
  }
}
