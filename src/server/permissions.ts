/**
 * The one permission table: which role may do what. Middleware, endpoints, services and the menus all ask
 * `can(role, action)`, so a rule changes in one place.
 */
import type { Role } from '../db/schema';

export const ACTIONS = [
  'read',
  'protocol.edit',
  'protocol.approve',
  'study.open',
  'results.enter',
  'sample.exclude',
  'analysis.run',
  'study.submit',
  'study.sign',
  'dossier.export',
  'members.manage',
  'tokens.manage',
] as const;
export type Action = (typeof ACTIONS)[number];

export const ROLE_LABELS: Record<Role, string> = {
  lab_scientist: 'Lab scientist',
  technician: 'Technician',
  medical_director: 'Medical director',
  quality: 'Quality & regulatory',
  lab_admin: 'Lab administrator',
};

export const PERMISSIONS: Record<Role, readonly Action[]> = {
  lab_scientist: ['read', 'protocol.edit', 'protocol.approve', 'study.open', 'sample.exclude', 'analysis.run', 'study.submit', 'dossier.export'],
  technician: ['read', 'results.enter'],
  medical_director: ['read', 'study.sign'],
  quality: ['read', 'dossier.export'],
  lab_admin: ['read', 'members.manage', 'tokens.manage'],
};

export function can(role: Role | null | undefined, action: Action): boolean {
  return !!role && PERMISSIONS[role].includes(action);
}
