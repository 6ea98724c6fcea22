import { endpoint, json, requireLab } from '../../../../server/endpoint';
import { loadTemplates } from '../../../../server/templates';

export const GET = endpoint(async ({ locals }) => {
  requireLab(locals, 'read');
  return json({ templates: loadTemplates() });
});
