/** Types for prisma/variants.mjs (kept as plain JS so plain node scripts can import it). */
export declare function derivePostgresqlSchema(sqliteSchema: string): string;
export declare function schemaFor(provider: 'sqlite' | 'postgresql', sqliteSchema: string): string;
