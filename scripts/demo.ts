/**
 * The demo laboratory: an invented lab, one person per role, a glucose protocol, a study collecting
 * results and a study already signed. Everything here is invented for the demo.
 */
import { hashPassword } from 'better-auth/crypto';
import { sql } from 'drizzle-orm';
import type { Database } from '../src/db/client';
import * as schema from '../src/db/schema';
import { defaultSettingsFromTemplate } from '../src/lib/protocolSchema';
import { seededRandom } from '../src/lib/stats/random';
import { recordAudit } from '../src/server/audit';
import { loadTemplate } from '../src/server/templates';

export const DEMO_PASSWORD = 'bench-demo-2026';
export const DEMO_LAB = { name: 'Eastmere District Laboratory', slug: 'eastmere' };
export const DEMO_PEOPLE = [
  { role: 'lab_scientist', name: 'Dana Okafor', email: 'scientist@eastmere.example' },
  { role: 'technician', name: 'Luis Pereira', email: 'technician@eastmere.example' },
  { role: 'medical_director', name: 'Dr Miriam Hale', email: 'director@eastmere.example' },
  { role: 'quality', name: 'Sam Whitlock', email: 'quality@eastmere.example' },
  { role: 'lab_admin', name: 'Priya Raman', email: 'admin@eastmere.example' },
] as const satisfies readonly { role: schema.Role; name: string; email: string }[];

export const DEMO_STUDY_TITLE = 'Kestrel bench analyser against Heron: plasma glucose';

/** The far-out sample and the two discordant ones, so tests and the README can name them. */
export const DEMO_SPECIAL_SAMPLES = { highLeverage: 'EM-0060', discordant: ['EM-0017', 'EM-0042'] } as const;

interface DemoPair {
  code: string;
  comparative: [number, number];
  candidate: [number, number];
  runDate: string;
}

/**
 * Invented glucose pairs (mg/dL): comparative values spread over 40–330 mg/dL, a candidate that reads about
 * 2 mg/dL + 3 % higher with a few percent of imprecision, two grossly discordant samples and one sample far
 * up the measuring interval (high leverage). Measured in duplicate over five days.
 */
export function demoPairs(count: number, seed: number, withSpecials: boolean): DemoPair[] {
  const rng = seededRandom(seed);
  const gauss = () => {
    const u = Math.max(rng.next(), 1e-12);
    return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rng.next());
  };
  const round1 = (v: number) => Math.round(v * 10) / 10;
  const pairs: DemoPair[] = [];
  for (let i = 1; i <= count; i++) {
    const code = `EM-${String(i).padStart(4, '0')}`;
    let truth = 40 * Math.exp(rng.next() * Math.log(330 / 40));
    if (withSpecials && code === DEMO_SPECIAL_SAMPLES.highLeverage) truth = 468;
    const measure = (level: number) => round1(level * (1 + 0.022 * gauss()) + 0.8 * gauss());
    let candidateTruth = 2 + 1.03 * truth;
    if (withSpecials && code === DEMO_SPECIAL_SAMPLES.discordant[0]) candidateTruth = truth * 1.42;
    if (withSpecials && code === DEMO_SPECIAL_SAMPLES.discordant[1]) candidateTruth = truth * 0.66;
    // The far-out sample also reads a little low on the candidate, so that it pulls the classical line.
    if (withSpecials && code === DEMO_SPECIAL_SAMPLES.highLeverage) candidateTruth = truth * 0.94;
    pairs.push({
      code,
      comparative: [measure(truth), measure(truth)],
      candidate: [measure(candidateTruth), measure(candidateTruth)],
      runDate: `2026-11-${String(16 + ((i - 1) % 5)).padStart(2, '0')}`,
    });
  }
  return pairs;
}

export async function isEmpty(db: Database): Promise<boolean> {
  const [row] = await db.select({ n: sql<number>`count(*)::int` }).from(schema.laboratories);
  return row.n === 0;
}

/** Seeds the demo laboratory in one transaction. */
export async function seedDemo(db: Database) {
  const template = loadTemplate('glucose');
  if (!template) throw new Error('protocols/glucose.json is missing: the demo needs it.');
  const passwordHash = await hashPassword(DEMO_PASSWORD);

  await db.transaction(async (tx) => {
    const [lab] = await tx.insert(schema.laboratories).values(DEMO_LAB).returning();
    const people: Record<string, string> = {};
    for (const person of DEMO_PEOPLE) {
      const id = crypto.randomUUID();
      people[person.role] = id;
      await tx.insert(schema.user).values({ id, name: person.name, email: person.email, emailVerified: true });
      await tx.insert(schema.account).values({ id: crypto.randomUUID(), accountId: id, providerId: 'credential', userId: id, password: passwordHash });
      await tx.insert(schema.memberships).values({ laboratoryId: lab.id, userId: id, role: person.role });
      await recordAudit(tx, { laboratoryId: lab.id, actorUserId: null, action: 'member.joined', entityType: 'membership', entityId: id, data: { role: person.role, seeded: true } });
    }
    const scientist = people.lab_scientist;

    const settings = {
      ...defaultSettingsFromTemplate(template),
      title: 'Plasma glucose: new bench analyser',
      candidateProcedure: 'Bench analyser "Kestrel", hexokinase reagent lot GLU-2611-B',
      comparativeProcedure: 'Core analyser "Heron", hexokinase reagent lot GLU-2609-A',
      samplePlan: { ...defaultSettingsFromTemplate(template).samplePlan, count: 60, replicates: 2 as const },
      demingLambda: { mode: 'duplicates' as const },
    };
    const [protocol] = await tx.insert(schema.protocols).values({ laboratoryId: lab.id, title: settings.title, analyte: template.name, createdBy: scientist }).returning();
    const [version] = await tx
      .insert(schema.protocolVersions)
      .values({
        protocolId: protocol.id,
        laboratoryId: lab.id,
        versionNumber: 1,
        status: 'approved',
        templateId: template.id,
        settings,
        createdBy: scientist,
        approvedBy: scientist,
        approvedAt: new Date(),
      })
      .returning();
    await recordAudit(tx, { laboratoryId: lab.id, actorUserId: scientist, action: 'protocol.approved', entityType: 'protocol_version', entityId: version.id, data: { versionNumber: 1, seeded: true } });

    const procedures = {
      candidate: { instrument: 'Bench analyser "Kestrel" (serial KS-0413)', reagentLot: 'GLU-2611-B', softwareVersion: '4.2.1' },
      comparative: { instrument: 'Core analyser "Heron" (serial HR-1187)', reagentLot: 'GLU-2609-A', softwareVersion: '7.0.3' },
    };
    const [study] = await tx
      .insert(schema.studies)
      .values({
        laboratoryId: lab.id,
        protocolVersionId: version.id,
        title: DEMO_STUDY_TITLE,
        candidateProcedure: procedures.candidate,
        comparativeProcedure: procedures.comparative,
        state: 'collecting',
        createdBy: scientist,
      })
      .returning();
    await tx.insert(schema.studyAssignments).values({ studyId: study.id, userId: people.technician });
    await recordAudit(tx, { laboratoryId: lab.id, actorUserId: scientist, action: 'study.opened', entityType: 'study', entityId: study.id, data: { seeded: true } });
    await insertPairs(tx, lab.id, study.id, people.technician, template.units.conventional, demoPairs(60, 20261116, true));
  });
}

type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];

async function insertPairs(tx: Tx, laboratoryId: string, studyId: string, enteredBy: string, unit: string, pairs: DemoPair[]) {
  for (const [index, pair] of pairs.entries()) {
    const [sample] = await tx.insert(schema.samples).values({ laboratoryId, studyId, code: pair.code, position: index + 1 }).returning();
    const rows = (['comparative', 'candidate'] as const).flatMap((procedure) =>
      pair[procedure].map((value, r) => ({ laboratoryId, studyId, sampleId: sample.id, procedure, replicate: r + 1, value, unit, runDate: pair.runDate, enteredBy })),
    );
    await tx.insert(schema.results).values(rows);
  }
  await recordAudit(tx, { laboratoryId, actorUserId: enteredBy, action: 'results.imported', entityType: 'study', entityId: studyId, data: { samples: pairs.length, seeded: true } });
}
