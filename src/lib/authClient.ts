/** better-auth's browser client, for the sign-in, sign-up, reset and sign-out islands. */
import { createAuthClient } from 'better-auth/react';

export const authClient = createAuthClient();
