// Every entity, listed once: the DataSource and the tests read this list.
import { AuditEntry } from './AuditEntry';
import { User } from './User';

export { AuditEntry, User };
export const entities = [User, AuditEntry];
