/**
 * For the study, import and results-API tests: a laboratory with an approved glucose protocol (mg/dL, measuring
 * interval 10–500, duplicates) and a study opened through the API and started collecting, plus row counts for
 * "nothing changed" checks.
 */
import { expect } from 'vitest';
import { sql } from 'drizzle-orm';
import { getDb } from '../../src/server/db';
import { protocols, protocolVersions } from '../../src/db/schema';
import { defaultSettingsFromTemplate } from '../../src/lib/protocolSchema';
import { loadTemplate } from '../../src/server/templates';
import { createLabWithMembers, signIn, type HttpClient, type TestLab } from './helpers';

export const PROCEDURES = {
  candidate: { instrument: 'Bench analyser "Wren" (serial W-11)', reagentLot: 'LOT-C1', softwareVersion: '2.0' },
  comparative: { instrument: 'Core analyser "Lark" (serial L-7)', reagentLot: 'LOT-R9', softwareVersion: '5.1' },
};

/** An approved protocol version written straight to the database (the protocol designer is tested elsewhere). */
export async function approvedGlucoseVersion(lab: TestLab, replicates: 1 | 2 = 2) {
  const template = loadTemplate('glucose');
  if (!template) throw new Error('protocols/glucose.json is missing');
  const base = defaultSettingsFromTemplate(template);
  const settings = { ...base, samplePlan: { ...base.samplePlan, count: 40, replicates, days: 5 }, demingLambda: replicates === 2 ? { mode: 'duplicates' as const } : base.demingLambda };
  const scientist = lab.people.lab_scientist.id;
  const db = getDb();
  const [protocol] = await db.insert(protocols).values({ laboratoryId: lab.id, title: 'Glucose comparison', analyte: 'Glucose', createdBy: scientist }).returning();
  const [version] = await db
    .insert(protocolVersions)
    .values({ protocolId: protocol.id, laboratoryId: lab.id, versionNumber: 1, status: 'approved', settings, createdBy: scientist, approvedBy: scientist, approvedAt: new Date() })
    .returning();
  return { version, settings };
}

export interface CollectingStudy {
  lab: TestLab;
  studyId: string;
  scientist: HttpClient;
  technician: HttpClient;
  base: string;
}

/** A lab, its approved protocol and a study in Collecting, opened and started by the lab scientist. */
export async function collectingStudy(label: string, replicates: 1 | 2 = 2): Promise<CollectingStudy> {
  const lab = await createLabWithMembers(label);
  const { version } = await approvedGlucoseVersion(lab, replicates);
  const scientist = await signIn(lab.people.lab_scientist.email);
  const opened = await scientist.post(`/api/labs/${lab.slug}/studies`, {
    title: 'Wren against Lark',
    protocolVersionId: version.id,
    ...PROCEDURES,
    technicianIds: [lab.people.technician.id],
  });
  expect(opened.status).toBe(201);
  const { study } = await opened.json();
  const started = await scientist.post(`/api/labs/${lab.slug}/studies/${study.id}/transitions`, { transition: 'start_collecting', version: study.version });
  expect(started.status).toBe(200);
  const technician = await signIn(lab.people.technician.email);
  return { lab, studyId: study.id, scientist, technician, base: `/api/labs/${lab.slug}/studies/${study.id}` };
}

const COUNTED = ['samples', 'results', 'attachments', 'import_logs', 'audit_events'] as const;

/** Row counts of the tables a results write touches (for "the database is unchanged"). */
export async function rowCounts(): Promise<Record<(typeof COUNTED)[number], number>> {
  const counts = {} as Record<(typeof COUNTED)[number], number>;
  for (const table of COUNTED) {
    const result = await getDb().execute(sql.raw(`select count(*)::int as n from ${table}`));
    counts[table] = (result.rows[0] as { n: number }).n;
  }
  return counts;
}

/** A problem+json answer: its status, media type and body. */
export async function problemOf(response: Response) {
  expect(response.headers.get('content-type')).toContain('application/problem+json');
  return (await response.json()) as { status: number; title: string; detail: string; errors?: { field: string; message: string; line?: number }[]; current?: unknown };
}
