/** What a laboratory's start page shows: its studies by state and its protocols, newest first. */
import { desc, eq, sql } from 'drizzle-orm';
import { getDb } from './db';
import { protocols } from '../db/schema';
import { listStudies } from './studies';

export async function labOverview(laboratoryId: string) {
  const protocolRows = await getDb()
    .select({
      id: protocols.id,
      title: protocols.title,
      analyte: protocols.analyte,
      // Correlated subquery with explicit table names: inside sql`` Drizzle renders bare column names.
      latestVersion: sql<number>`(select max(v.version_number)::int from protocol_versions v where v.protocol_id = protocols.id)`,
    })
    .from(protocols)
    .where(eq(protocols.laboratoryId, laboratoryId))
    .orderBy(desc(protocols.createdAt));
  return { studies: await listStudies(laboratoryId), protocols: protocolRows };
}
