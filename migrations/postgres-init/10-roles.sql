-- Claybench's PostgreSQL roles: the schema's owner, who runs `claybench migrate`, and the role the
-- application connects as, which reads and adds audit events but can never change or remove one.
--
-- The PostgreSQL image runs this once, as its superuser, in the database it creates at first start
-- (docker-compose.yml mounts this folder as /docker-entrypoint-initdb.d). By hand, as a superuser,
-- connected to Claybench's database (an existing one too: its tables get the same grants):
--   CLAYBENCH_APP_PASSWORD='...' psql -d claybench -f migrations/postgres-init/10-roles.sql
--
-- Names and passwords come from the environment (psql 15 or later reads it with \getenv):
--   CLAYBENCH_OWNER_ROLE      the schema's owner (default claybench); kept if it exists
--   CLAYBENCH_OWNER_PASSWORD  its password, set when given
--   CLAYBENCH_APP_ROLE        the application's role (default claybench_app); kept if it exists
--   CLAYBENCH_APP_PASSWORD    its password, set when given
-- Running it again changes nothing but the passwords given.
--
-- The application's role may SELECT, INSERT, UPDATE and DELETE every table but audit_event, where it
-- may only SELECT and INSERT. Tables the owner creates later get the same (default privileges); for
-- audit_event, created by the first migration, migration 0005 takes back what the defaults gave.

\set ON_ERROR_STOP on
\set owner_role claybench
\set app_role claybench_app
\getenv owner_role CLAYBENCH_OWNER_ROLE
\getenv app_role CLAYBENCH_APP_ROLE
\getenv owner_password CLAYBENCH_OWNER_PASSWORD
\getenv app_password CLAYBENCH_APP_PASSWORD

SELECT NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = :'owner_role') AS make_owner,
       NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = :'app_role') AS make_app,
       current_database() AS database_name
\gset

\if :make_owner
    CREATE ROLE :"owner_role" LOGIN;
\endif
\if :make_app
    CREATE ROLE :"app_role" LOGIN;
\endif
\if :{?owner_password}
    ALTER ROLE :"owner_role" PASSWORD :'owner_password';
\endif
\if :{?app_password}
    ALTER ROLE :"app_role" PASSWORD :'app_password';
\endif

-- The owner owns the database and its schema, so its migrations may create and alter everything.
ALTER DATABASE :"database_name" OWNER TO :"owner_role";
ALTER SCHEMA public OWNER TO :"owner_role";
REVOKE CREATE ON SCHEMA public FROM PUBLIC;

GRANT CONNECT ON DATABASE :"database_name" TO :"app_role";
GRANT USAGE ON SCHEMA public TO :"app_role";

-- Tables and sequences that exist already (a database migrated before this script ran) ...
GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA public TO :"app_role";
GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO :"app_role";
-- ... and those the owner's migrations create from now on.
ALTER DEFAULT PRIVILEGES FOR ROLE :"owner_role" IN SCHEMA public
    GRANT SELECT, INSERT, UPDATE, DELETE ON TABLES TO :"app_role";
ALTER DEFAULT PRIVILEGES FOR ROLE :"owner_role" IN SCHEMA public
    GRANT USAGE, SELECT ON SEQUENCES TO :"app_role";

-- The audit trail: read and append only.
SELECT to_regclass('public.audit_event') IS NOT NULL AS have_events
\gset
\if :have_events
    REVOKE UPDATE, DELETE, TRUNCATE ON public.audit_event FROM :"app_role";
\endif
