/** The analyte templates in protocols/, each checked against the template schema when read. */
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { analyteTemplateSchema, type AnalyteTemplate } from '../lib/protocolSchema';

/** The app and the scripts run from the repository root, where protocols/ lives. */
export const TEMPLATES_DIR = join(process.cwd(), 'protocols');

export function loadTemplates(dir = TEMPLATES_DIR): AnalyteTemplate[] {
  return readdirSync(dir)
    .filter((file) => file.endsWith('.json'))
    .sort()
    .map((file) => {
      const parsed = analyteTemplateSchema.safeParse(JSON.parse(readFileSync(join(dir, file), 'utf8')));
      if (!parsed.success) throw new Error(`protocols/${file} is not a valid template: ${parsed.error.message}`);
      return parsed.data;
    });
}

export function loadTemplate(id: string, dir = TEMPLATES_DIR): AnalyteTemplate | null {
  return loadTemplates(dir).find((t) => t.id === id) ?? null;
}
