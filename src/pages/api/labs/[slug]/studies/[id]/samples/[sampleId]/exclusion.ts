import { z } from 'zod';
import { excludeSample, includeSample } from '../../../../../../../../server/analysis';
import { endpoint, json, requireLab } from '../../../../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../../../../server/problem';

const reasonSchema = z.object({
  reason: z.string({ error: 'Give a reason.' }).trim().min(1, 'Give a reason; it goes in the audit trail.').max(2000, 'Keep the reason under 2000 characters.'),
});

/** Excludes the sample from the analysis, with a reason. */
export const POST = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'sample.exclude');
  const { reason } = parseBody(reasonSchema, await readJson(request));
  return json({ exclusion: await excludeSample({ id: user.id }, lab.id, params.id!, params.sampleId!, reason) }, 201);
});

/** Includes the sample again (the exclusion is revoked, with a reason). */
export const DELETE = endpoint(async ({ locals, params, request }) => {
  const { lab, user } = requireLab(locals, 'sample.exclude');
  const { reason } = parseBody(reasonSchema, await readJson(request));
  return json({ exclusion: await includeSample({ id: user.id }, lab.id, params.id!, params.sampleId!, reason) });
});
