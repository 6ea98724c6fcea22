/** Bodies of the membership, invitation and API-token endpoints, shared by the islands and the server. */
import { z } from 'zod';
import { ROLES } from '../db/schema';

export const roleSchema = z.enum(ROLES, { error: `Choose one of: ${ROLES.join(', ')}.` });

export const inviteSchema = z.object({
  email: z.email('Give a valid e-mail address.').max(254, 'That address is too long.'),
  role: roleSchema,
});

export const roleChangeSchema = z.object({
  role: roleSchema,
  version: z.int('version is the whole number you last read.').min(1),
});

export const tokenCreateSchema = z.object({
  name: z.string().trim().min(1, 'Name the token after the system that will use it.').max(100, 'Keep the name under 100 characters.'),
});
