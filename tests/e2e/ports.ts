/**
 * Ports of the end-to-end stack, apart from the ones `npm start` uses so both can run at once.
 * E2E_PORT_BASE moves all three, so that parallel runs do not collide.
 */
const base = Number(process.env.E2E_PORT_BASE ?? 54400);
export const E2E_PORTS = { web: base, smtp: base + 1, db: base + 2 } as const;
