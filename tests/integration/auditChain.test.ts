import { asc, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { auditEvents } from '../../src/db/schema';
import { chainHash, recordAudit } from '../../src/server/audit';
import { getDb } from '../../src/server/db';
import { createLabWithMembers, httpClient, signIn, type TestLab } from './helpers';

/** Runs one statement with the table's triggers (the append-only one among them) switched off, as its owner. */
async function withAuditTriggersOff(statement: ReturnType<typeof sql>) {
  await getDb().transaction(async (tx) => {
    await tx.execute(sql`alter table audit_events disable trigger all`);
    await tx.execute(statement);
    await tx.execute(sql`alter table audit_events enable trigger all`);
  });
}

async function eventsOf(lab: TestLab) {
  return getDb().select().from(auditEvents).where(eq(auditEvents.laboratoryId, lab.id)).orderBy(asc(auditEvents.id));
}

/** A lab with a short chain of its own: five events recorded the way services record them. */
async function labWithChain(label: string) {
  const lab = await createLabWithMembers(label);
  for (let i = 1; i <= 5; i++) {
    await recordAudit(getDb(), { laboratoryId: lab.id, actorUserId: lab.people.lab_scientist.id, action: 'test.step', entityType: 'test', entityId: String(i), data: { step: i } });
  }
  return lab;
}

describe('verifying the audit chain', () => {
  let lab: TestLab;

  beforeAll(async () => {
    lab = await labWithChain('chain');
  });

  it('reports an intact chain with its event count and the last stored hash', async () => {
    const quality = await signIn(lab.people.quality.email);
    const response = await quality.get(`/api/labs/${lab.slug}/audit/verify`);
    expect(response.status).toBe(200);
    const { chain } = await response.json();
    const events = await eventsOf(lab);
    expect(chain).toEqual({ intact: true, events: events.length, lastHash: events.at(-1)!.hash });
  });

  it('refuses the append-only table an ordinary update, so tampering needs the triggers switched off', async () => {
    const [first] = await eventsOf(lab);
    await expect(getDb().execute(sql`update audit_events set data = '{}'::jsonb where id = ${first.id}`)).rejects.toThrow();
  });

  it('finds a row changed in SQL at that very row', async () => {
    const events = await eventsOf(lab);
    const target = events[2];
    await withAuditTriggersOff(sql`update audit_events set data = '{"step": 99}'::jsonb where id = ${target.id}`);
    const quality = await signIn(lab.people.quality.email);
    const { chain } = await (await quality.get(`/api/labs/${lab.slug}/audit/verify`)).json();
    expect(chain.intact).toBe(false);
    expect(chain.brokenAt.id).toBe(target.id);
    expect(chain.brokenAt.problem).toMatch(/content does not match its hash/);
    // The page says it too, naming the row.
    const page = await quality.get(`/labs/${lab.slug}/audit`);
    expect(page.status).toBe(200);
    expect(await page.text()).toContain(`Chain broken at event ${target.id}`);
  });

  it("does not let one laboratory's broken chain show in another's", async () => {
    const other = await labWithChain('chain-other');
    const quality = await signIn(other.people.quality.email);
    const { chain } = await (await quality.get(`/api/labs/${other.slug}/audit/verify`)).json();
    expect(chain.intact).toBe(true);
  });
});

describe('other kinds of tampering', () => {
  it('a row rewritten with a fresh, self-consistent hash is found at the row after it', async () => {
    const lab = await labWithChain('chain-rehash');
    const events = await eventsOf(lab);
    const target = events[1];
    const forged = { ...target, data: { step: 42 } };
    const forgedHash = chainHash(target.prevHash, forged);
    await withAuditTriggersOff(sql`update audit_events set data = ${JSON.stringify(forged.data)}::jsonb, hash = ${forgedHash} where id = ${target.id}`);
    const scientist = await signIn(lab.people.lab_scientist.email);
    const { chain } = await (await scientist.get(`/api/labs/${lab.slug}/audit/verify`)).json();
    // The forged row matches its own hash, but the next row still names the old one.
    expect(chain).toMatchObject({ intact: false, brokenAt: { id: events[2].id } });
    expect(chain.brokenAt.problem).toMatch(/link to the previous event does not match/);
  });

  it('a deleted row is found at the row after it', async () => {
    const lab = await labWithChain('chain-delete');
    const events = await eventsOf(lab);
    await withAuditTriggersOff(sql`delete from audit_events where id = ${events[3].id}`);
    const scientist = await signIn(lab.people.lab_scientist.email);
    const { chain } = await (await scientist.get(`/api/labs/${lab.slug}/audit/verify`)).json();
    expect(chain).toMatchObject({ intact: false, brokenAt: { id: events[4].id } });
    expect(chain.brokenAt.problem).toMatch(/link to the previous event does not match/);
  });
});

describe('who may verify the chain', () => {
  it('answers 401 without a session and 404 for another laboratory', async () => {
    const lab = await createLabWithMembers('chain-access');
    expect((await httpClient().get(`/api/labs/${lab.slug}/audit/verify`)).status).toBe(401);
    const other = await createLabWithMembers('chain-outsider');
    const outsider = await signIn(other.people.quality.email);
    expect((await outsider.get(`/api/labs/${lab.slug}/audit/verify`)).status).toBe(404);
  });
});
