/** What a laboratory's start page shows: its studies by state and its protocols, newest first. */
import { desc, eq, sql } from 'drizzle-orm';
import { getDb } from './db';
import { protocols, protocolVersions, samples, studies } from '../db/schema';

export async function labOverview(laboratoryId: string) {
  const db = getDb();
  const studyRows = await db
    .select({
      id: studies.id,
      title: studies.title,
      state: studies.state,
      verdict: studies.verdict,
      revision: studies.revision,
      updatedAt: studies.updatedAt,
      samples: sql<number>`(select count(*)::int from ${samples} where ${samples.studyId} = ${studies.id})`,
    })
    .from(studies)
    .where(eq(studies.laboratoryId, laboratoryId))
    .orderBy(desc(studies.updatedAt));
  const protocolRows = await db
    .select({
      id: protocols.id,
      title: protocols.title,
      analyte: protocols.analyte,
      latestVersion: sql<number>`(select max(${protocolVersions.versionNumber})::int from ${protocolVersions} where ${protocolVersions.protocolId} = ${protocols.id})`,
    })
    .from(protocols)
    .where(eq(protocols.laboratoryId, laboratoryId))
    .orderBy(desc(protocols.createdAt));
  return { studies: studyRows, protocols: protocolRows };
}
