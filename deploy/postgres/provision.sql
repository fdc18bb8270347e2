-- Provision PostgreSQL + PostGIS for the control-mark registry. Idempotent.
--
-- Run as the database superuser, for example on Debian:
--   sudo -u postgres psql -X -f deploy/postgres/provision.sql
-- Two roles (deploy/README.md, "Database roles"; registry/dbroles.py):
--   db_owner   owns the database and every table; no login. `manage.py migrate` runs as it
--              (the superuser over the socket with REGISTRY_DB_ROLE=<db_owner>).
--   db_user    the application's login (the runtime role); owns nothing. After each migrate
--              it gets SELECT/INSERT/UPDATE/DELETE on the tables, but only INSERT and SELECT on
--              the audit trail (REGISTRY_DB_RUNTIME_ROLE=<db_user>), so it can neither rewrite,
--              empty nor switch off the guards of the audit trail.
-- psql variables (all optional):
--   db_user           role the application logs in as      (default: registry)
--   db_owner          role that owns the tables            (default: <db_user>_owner)
--   db_name           application database                 (default: registry)
--   createdb          true: the role may create databases  (default: false; deploy/test.sh sets
--                     true because pytest-django creates test_<db_name>, owned by the test login)
--   createrole        true: the role may create roles      (default: false; deploy/test.sh sets
--                     true so that the tests can make a runtime role and check its rights)
--   template_postgis  true: also create PostGIS in template1 so that every new database,
--                     test databases included, has it      (default: false)
-- The password is not set here (it would show in the process list); set it with
--   sudo -u postgres psql -c '\password registry'
-- or rely on peer authentication over the Unix socket (see deploy/README.md).

\set ON_ERROR_STOP on
\if :{?db_user}
\else
  \set db_user registry
\endif
\if :{?db_owner}
\else
  \set db_owner :db_user _owner
\endif
\if :{?createrole}
\else
  \set createrole false
\endif
\if :{?db_name}
\else
  \set db_name registry
\endif
\if :{?createdb}
\else
  \set createdb false
\endif
\if :{?template_postgis}
\else
  \set template_postgis false
\endif

-- The role: log in, nothing more (no superuser, no role creation).
SELECT format('CREATE ROLE %I LOGIN', :'db_user')
 WHERE NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = :'db_user') \gexec
SELECT format('ALTER ROLE %I LOGIN NOSUPERUSER NOCREATEROLE', :'db_user') \gexec
\if :createdb
  SELECT format('ALTER ROLE %I CREATEDB', :'db_user') \gexec
\endif
\if :createrole
  SELECT format('ALTER ROLE %I CREATEROLE', :'db_user') \gexec
\endif

-- The owner: no login; owns the database and, after migrate, every table.
SELECT format('CREATE ROLE %I NOLOGIN', :'db_owner')
 WHERE NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = :'db_owner') \gexec
SELECT format('ALTER ROLE %I NOLOGIN NOSUPERUSER NOCREATEROLE NOCREATEDB', :'db_owner') \gexec

-- PostGIS is not a trusted extension: only a superuser may create it. Test databases are
-- copied from template1, so the test setup puts it there once.
\if :template_postgis
  \connect template1
  CREATE EXTENSION IF NOT EXISTS postgis;
\endif

-- The application database, owned by the owner role (PostgreSQL 15: the database owner owns
-- schema public and may create tables in it).
\connect postgres
SELECT format('CREATE DATABASE %I OWNER %I ENCODING %L TEMPLATE template1', :'db_name', :'db_owner', 'UTF8')
 WHERE NOT EXISTS (SELECT 1 FROM pg_database WHERE datname = :'db_name') \gexec
SELECT format('ALTER DATABASE %I OWNER TO %I', :'db_name', :'db_owner') \gexec

\connect :"db_name"
CREATE EXTENSION IF NOT EXISTS postgis;
SELECT format('GRANT ALL ON SCHEMA public TO %I', :'db_owner') \gexec
-- The runtime role may connect and use the schema; its table rights come from migrate (above).
SELECT format('GRANT CONNECT ON DATABASE %I TO %I', :'db_name', :'db_user') \gexec
SELECT format('GRANT USAGE ON SCHEMA public TO %I', :'db_user') \gexec
SELECT format('REVOKE CREATE ON SCHEMA public FROM %I', :'db_user') \gexec
SELECT 'provisioned: owner ' || :'db_owner' || ', runtime role ' || :'db_user' || ', database ' || :'db_name'
       || ', PostGIS ' || (SELECT extversion FROM pg_extension WHERE extname = 'postgis') AS result;
