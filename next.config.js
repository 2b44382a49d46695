/** @type {import('next').NextConfig} */
const nextConfig = {
  reactStrictMode: true,
  poweredByHeader: false,
  // Native and WebAssembly modules stay outside the server bundle and load from node_modules.
  serverExternalPackages: [
    'better-sqlite3',
    '@node-rs/argon2',
    '@prisma/adapter-better-sqlite3',
    '@prisma/adapter-pg',
    '@prisma/schema-engine-wasm',
    'pg',
  ],
  typedRoutes: false,
};

export default nextConfig;
