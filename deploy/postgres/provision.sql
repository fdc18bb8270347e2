-- Provision PostgreSQL + PostGIS for the control-mark registry. Idempotent.
--
-- Run as the database superuser, for example on Debian:
--   sudo -u postgres psql -X -f deploy/postgres/provision.sql
-- psql variables (all optional):
--   db_user           role the application logs in as      (default: registry)
--   db_name           application database                 (default: registry)
--   createdb          true: the role may create databases  (default: false; deploy/test.sh sets
--                     true because pytest-django creates test_<db_name>)
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

-- PostGIS is not a trusted extension: only a superuser may create it. Test databases are
-- copied from template1, so the test setup puts it there once.
\if :template_postgis
  \connect template1
  CREATE EXTENSION IF NOT EXISTS postgis;
\endif

-- The application database, owned by the role (PostgreSQL 15: the owner may create
-- tables in schema public).
\connect postgres
SELECT format('CREATE DATABASE %I OWNER %I ENCODING %L TEMPLATE template1', :'db_name', :'db_user', 'UTF8')
 WHERE NOT EXISTS (SELECT 1 FROM pg_database WHERE datname = :'db_name') \gexec
SELECT format('ALTER DATABASE %I OWNER TO %I', :'db_name', :'db_user') \gexec

\connect :"db_name"
CREATE EXTENSION IF NOT EXISTS postgis;
SELECT format('GRANT ALL ON SCHEMA public TO %I', :'db_user') \gexec
SELECT 'provisioned: role ' || :'db_user' || ', database ' || :'db_name'
       || ', PostGIS ' || (SELECT extversion FROM pg_extension WHERE extname = 'postgis') AS result;
