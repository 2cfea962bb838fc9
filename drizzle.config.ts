import { defineConfig } from 'drizzle-kit';

export default defineConfig({
	schema: './src/lib/server/db/schema/*.ts',
	out: './drizzle',
	dialect: 'postgresql',
	casing: 'snake_case',
	dbCredentials: { url: process.env.DATABASE_URL ?? 'postgres://localhost/ebbline' },
	strict: true,
	verbose: true
});
