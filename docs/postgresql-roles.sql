-- rig results server: what each station's role may do (docs/postgresql.md, "Setting up the
-- server").  This file is data for psql; rig never runs it.
--
-- Run it as the role that owns the database (the one that ran `rig sync --upgrade-server`), once
-- the server holds this rig version's schema, and again after every `rig sync --upgrade-server`:
--
--     psql "postgresql://rig_owner@db.lab.example/rig" -f docs/postgresql-roles.sql
--
-- Running it again changes nothing that is already in place.  It needs the group role
-- rig_station (NOLOGIN), of which every station's login role is a member; a superuser makes the
-- roles first (docs/postgresql.md).  Then say which role sends under which station name:
--
--     INSERT INTO station_roles (station, role_name) VALUES ('qa-b1', 'bench_a');
--
-- What it sets up:
--   * a station role reads every row of the tables granted below (fleet statistics and reports
--     read the whole server);
--   * it adds and changes rows of runs, steps, readings, relay_wear, station_names and
--     store_senders, the tables a send writes (a send is an upsert: INSERT, and UPDATE for a run sent again, and
--     SELECT for the upsert's RETURNING), and only rows of the station names station_roles gives
--     it (row-level security);
--   * it deletes nothing and can drop, alter or create no table: those need the owner.
-- The owner and superusers are not held by these policies (PostgreSQL lets a table's owner and
-- a superuser bypass row-level security), and no history of changes is kept.

\set ON_ERROR_STOP on

BEGIN;

-- which login role sends under which station name (a role may send under several)
CREATE TABLE IF NOT EXISTS station_roles (
    station TEXT PRIMARY KEY,
    role_name TEXT NOT NULL
);

-- no station role makes tables of its own (already so by default since PostgreSQL 15)
REVOKE CREATE ON SCHEMA public FROM PUBLIC;

-- start from no grants, so a table this file no longer lists loses what it had
REVOKE ALL ON ALL TABLES IN SCHEMA public FROM rig_station;

GRANT SELECT ON rig_schema, store_identity, station_roles TO rig_station;
GRANT SELECT, INSERT, UPDATE ON runs, steps, readings, relay_wear, station_names, store_senders
    TO rig_station;

-- Row-level security on the six tables a send writes: every row may be read; a row may be
-- added or changed only where it is of the role's own station names: runs, relay wear, name
-- claims and send passes by their station, steps and readings by their run's.  The expressions are resolved when
-- a policy is made, as a view's are.
DO $$
DECLARE
    own_station CONSTANT TEXT :=
        'station IN (SELECT m.station FROM station_roles m WHERE m.role_name = current_user)';
    own_run CONSTANT TEXT :=
        'run_id IN (SELECT r.id FROM runs r JOIN station_roles m ON m.station = r.station'
        ' WHERE m.role_name = current_user)';
    tbl TEXT;
    mine TEXT;
BEGIN
    FOR tbl, mine IN VALUES ('runs', own_station), ('relay_wear', own_station),
            ('station_names', own_station), ('store_senders', own_station),
            ('steps', own_run), ('readings', own_run)
    LOOP
        EXECUTE format('ALTER TABLE %I ENABLE ROW LEVEL SECURITY', tbl);
        EXECUTE format('DROP POLICY IF EXISTS station_reads ON %I', tbl);
        EXECUTE format('CREATE POLICY station_reads ON %I FOR SELECT TO rig_station'
                       ' USING (true)', tbl);
        EXECUTE format('DROP POLICY IF EXISTS own_station_writes ON %I', tbl);
        EXECUTE format('CREATE POLICY own_station_writes ON %I FOR ALL TO rig_station'
                       ' USING (%s) WITH CHECK (%s)', tbl, mine, mine);
    END LOOP;
END
$$;

COMMIT;
