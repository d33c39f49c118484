/** Random tokens and their stored hashes (SHA-256 suffices for 256-bit random tokens), and password hashing. */
import { createHash, randomBytes } from 'node:crypto';

import bcrypt from 'bcryptjs';

export const randomToken = (bytes = 32): string => randomBytes(bytes).toString('base64url');
export const sha256Hex = (text: string): string => createHash('sha256').update(text, 'utf8').digest('hex');

export const hashPassword = (password: string, rounds: number): Promise<string> =>
  bcrypt.hash(password, rounds);
export const checkPassword = (password: string, hash: string): Promise<boolean> =>
  bcrypt.compare(password, hash);

/** A fixed hash to compare against when the account does not exist, so timing does not reveal it. */
let dummyHash: string | undefined;
export async function spendPasswordCheck(password: string, rounds: number): Promise<void> {
  dummyHash ??= await bcrypt.hash('not-a-real-password', rounds);
  await bcrypt.compare(password, dummyHash);
}
