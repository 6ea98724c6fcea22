/** The menu of a laboratory for one role: only what that role can use is shown. */
import type { Role } from '../db/schema';
import { can, type Action } from '../server/permissions';

interface MenuItem {
  label: string;
  path: string;
  action: Action;
  needsMailCapture?: boolean;
}

const ITEMS: MenuItem[] = [
  { label: 'Overview', path: '', action: 'read' },
  { label: 'Protocols', path: '/protocols', action: 'read' },
  { label: 'Studies', path: '/studies', action: 'read' },
  { label: 'Audit trail', path: '/audit', action: 'read' },
  { label: 'Members', path: '/members', action: 'members.manage' },
  { label: 'API tokens', path: '/tokens', action: 'tokens.manage' },
  { label: 'Mailbox', path: '/mailbox', action: 'members.manage', needsMailCapture: true },
];

export function labMenu(slug: string, role: Role | null, mailCapture: boolean) {
  return ITEMS.filter((item) => can(role, item.action) && (!item.needsMailCapture || mailCapture)).map((item) => ({
    label: item.label,
    href: `/labs/${slug}${item.path}`,
  }));
}
