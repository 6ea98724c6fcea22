import { studyOpenSchema } from '../../../../../lib/resultSchemas';
import { endpoint, json, requireLab } from '../../../../../server/endpoint';
import { parseBody, readJson } from '../../../../../server/problem';
import { listStudies, openStudy } from '../../../../../server/studies';

export const GET = endpoint(async ({ locals }) => {
  const { lab } = requireLab(locals, 'read');
  return json({ studies: await listStudies(lab.id) });
});

export const POST = endpoint(async ({ locals, request }) => {
  const { lab, user } = requireLab(locals, 'study.open');
  const body = parseBody(studyOpenSchema, await readJson(request));
  return json({ study: await openStudy(user.id, lab.id, body) }, 201);
});
