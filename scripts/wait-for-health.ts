/** Waits until the app answers /api/health with 200 (it checked its database). */
export async function waitForHealth(baseUrl: string, seconds = 60) {
  const deadline = Date.now() + seconds * 1000;
  while (Date.now() < deadline) {
    try {
      if ((await fetch(`${baseUrl}/api/health`)).ok) return;
    } catch {
      // not listening yet
    }
    await new Promise((r) => setTimeout(r, 200));
  }
  throw new Error(`${baseUrl}/api/health did not answer within ${seconds} s.`);
}
