/** Ports of the end-to-end stack, apart from the ones `npm start` uses so both can run at once. */
export const E2E_PORTS = { web: 54400, smtp: 54401, db: 54402 } as const;
