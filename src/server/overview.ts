/** What a laboratory's start page shows: its studies by state and its protocols, newest first. */
import { desc, eq, sql } from 'drizzle-orm';
import { getDb } from './db';
import { protocols, studies } from '../db/schema';

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
      // Correlated subqueries name their tables explicitly: inside sql`` Drizzle renders bare column names.
      samples: sql<number>`(select count(*)::int from samples s where s.study_id = studies.id)`,
    })
    .from(studies)
    .where(eq(studies.laboratoryId, laboratoryId))
    .orderBy(desc(studies.updatedAt));
  const protocolRows = await db
    .select({
      id: protocols.id,
      title: protocols.title,
      analyte: protocols.analyte,
      latestVersion: sql<number>`(select max(v.version_number)::int from protocol_versions v where v.protocol_id = protocols.id)`,
    })
    .from(protocols)
    .where(eq(protocols.laboratoryId, laboratoryId))
    .orderBy(desc(protocols.createdAt));
  return { studies: studyRows, protocols: protocolRows };
}
