-- Each lot's judged summary is a row, so the lift map, the home page, the review queue
-- and the test list read verdicts instead of judging a project's tests on a view.
--
-- A change that can alter a lot's verdict marks the lot in `lots_to_judge`, in the
-- change's own transaction, by the triggers below (the one list of what affects a lot:
-- its tests, the lot itself, its certificates, its test plan, a one-point check of its
-- source, and edits of its clause, source or lab curve). The summary is judged again
-- from the marks (`ledger::lot_summaries::settle`) before any view reads it. A write
-- then touches no row other writers share: no project row, no counter held to commit.
-- Marks are only appended (no unique key to wait on); the triggers run once per
-- statement, so a bulk insert marks each of its lots once.
CREATE TABLE lot_summaries (
    lot_id            BIGINT PRIMARY KEY REFERENCES lots(id) ON DELETE CASCADE,
    project_id        BIGINT NOT NULL REFERENCES projects(id),
    reduction_version TEXT NOT NULL,
    display_state     TEXT NOT NULL,
    accepted          BIGINT NOT NULL,
    tests_entered     BIGINT NOT NULL,
    tests_owed        BIGINT NOT NULL,
    judged_json       TEXT NOT NULL,
    -- Each test's result by result code, for the test list's result filter.
    test_results      TEXT NOT NULL,
    judged_at         TEXT NOT NULL,
    -- The newest mark this summary was judged from.
    judged_mark       BIGINT NOT NULL
);
CREATE INDEX lot_summaries_by_project ON lot_summaries (project_id, display_state);

CREATE TABLE lots_to_judge (
    id         BIGSERIAL PRIMARY KEY,
    project_id BIGINT NOT NULL,
    lot_id     BIGINT NOT NULL
);
CREATE INDEX lots_to_judge_by_project ON lots_to_judge (project_id, lot_id);
CREATE INDEX lots_to_judge_by_lot ON lots_to_judge (lot_id);

-- Every existing lot is judged once, by the first view or by `liftledger rejudge`.
INSERT INTO lots_to_judge (project_id, lot_id) SELECT project_id, id FROM lots;

CREATE FUNCTION mark_lots_of_new_tests() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT DISTINCT project_id, lot_id FROM new_rows;
    RETURN NULL;
END;
$$;

CREATE FUNCTION mark_lots_of_changed_tests() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT project_id, lot_id FROM new_rows UNION SELECT project_id, lot_id FROM old_rows;
    RETURN NULL;
END;
$$;

CREATE FUNCTION mark_lots_of_old_tests() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT DISTINCT project_id, lot_id FROM old_rows;
    RETURN NULL;
END;
$$;

CREATE TRIGGER field_tests_added_mark_lots AFTER INSERT ON field_tests
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_new_tests();
CREATE TRIGGER field_tests_changed_mark_lots AFTER UPDATE ON field_tests
    REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_changed_tests();
CREATE TRIGGER field_tests_removed_mark_lots AFTER DELETE ON field_tests
    REFERENCING OLD TABLE AS old_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_old_tests();

-- Certificates and test plans carry project_id and lot_id as tests do.
CREATE TRIGGER certificates_added_mark_lots AFTER INSERT ON certificates
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_new_tests();
CREATE TRIGGER certificates_changed_mark_lots AFTER UPDATE ON certificates
    REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_changed_tests();
CREATE TRIGGER test_plans_added_mark_lots AFTER INSERT ON test_plans
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_new_tests();
CREATE TRIGGER test_plans_changed_mark_lots AFTER UPDATE ON test_plans
    REFERENCING OLD TABLE AS old_rows NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_changed_tests();

CREATE FUNCTION mark_new_lots() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id) SELECT project_id, id FROM new_rows;
    RETURN NULL;
END;
$$;
CREATE TRIGGER lots_added_mark_lots AFTER INSERT ON lots
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_new_lots();
CREATE TRIGGER lots_changed_mark_lots AFTER UPDATE ON lots
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_new_lots();

CREATE FUNCTION mark_lots_of_one_points() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l
    WHERE EXISTS (SELECT 1 FROM changed c
                  WHERE c.project_id = l.project_id AND c.source_id = l.source_id);
    RETURN NULL;
END;
$$;
CREATE TRIGGER one_points_added_mark_lots AFTER INSERT ON one_point_checks
    REFERENCING NEW TABLE AS changed
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_one_points();
CREATE TRIGGER one_points_changed_mark_lots AFTER UPDATE ON one_point_checks
    REFERENCING NEW TABLE AS changed
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_one_points();
CREATE TRIGGER one_points_removed_mark_lots AFTER DELETE ON one_point_checks
    REFERENCING OLD TABLE AS changed
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_one_points();

CREATE FUNCTION mark_lots_of_lab_tests() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l JOIN new_rows n ON l.lab_test_id = n.id;
    RETURN NULL;
END;
$$;
CREATE TRIGGER lab_tests_changed_mark_lots AFTER UPDATE ON lab_tests
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_lab_tests();

CREATE FUNCTION mark_lots_of_clauses() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l JOIN new_rows n ON l.clause_id = n.id;
    RETURN NULL;
END;
$$;
CREATE TRIGGER clauses_changed_mark_lots AFTER UPDATE ON clauses
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_clauses();

CREATE FUNCTION mark_lots_of_sources() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO lots_to_judge (project_id, lot_id)
    SELECT l.project_id, l.id FROM lots l JOIN new_rows n ON l.source_id = n.id;
    RETURN NULL;
END;
$$;
CREATE TRIGGER sources_changed_mark_lots AFTER UPDATE ON sources
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION mark_lots_of_sources();

-- The project's revision now moves when its summaries are judged again (the settling
-- bumps it), not on every audited write: bumping it there put one row lock, held to
-- the commit, in front of every writer of the project (measured with pgbench at 32
-- clients on this kind of machine: 282 transactions/s against 5,328 without it).
DROP TRIGGER audit_log_bumps_revision ON audit_log;
DROP FUNCTION audit_log_bump_revision();

-- Automatic test numbers come from a counter per project, taken with one short
-- UPDATE … RETURNING (see `db::numbering`), instead of a count kept on the project row
-- by a trigger on every insert.
DROP TRIGGER field_tests_counted_up ON field_tests;
DROP TRIGGER field_tests_counted_down ON field_tests;
DROP FUNCTION field_tests_count_up();
DROP FUNCTION field_tests_count_down();
CREATE TABLE test_counters (
    project_id  BIGINT PRIMARY KEY REFERENCES projects(id) ON DELETE CASCADE,
    last_number BIGINT NOT NULL
);
INSERT INTO test_counters (project_id, last_number) SELECT id, field_test_count FROM projects;
ALTER TABLE projects DROP COLUMN field_test_count;
CREATE FUNCTION count_tests_of_new_projects() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO test_counters (project_id, last_number) SELECT id, 0 FROM new_rows;
    RETURN NULL;
END;
$$;
CREATE TRIGGER projects_added_count_tests AFTER INSERT ON projects
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION count_tests_of_new_projects();

-- The instrument register's revision: every change of a register table moves it, so a
-- server keeps the register a project's tests are checked against and reads one number
-- per test instead of the register's seven tables. Register changes are rare; the row
-- they update is nobody else's.
CREATE TABLE register_revision (
    id       BIGINT PRIMARY KEY CHECK (id = 1),
    revision BIGINT NOT NULL
);
INSERT INTO register_revision (id, revision) VALUES (1, 0);
CREATE FUNCTION bump_register_revision() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    UPDATE register_revision SET revision = revision + 1 WHERE id = 1;
    RETURN NULL;
END;
$$;
CREATE TRIGGER instruments_moves_register AFTER INSERT OR UPDATE OR DELETE ON instruments
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER instrument_records_moves_register AFTER INSERT OR UPDATE OR DELETE ON instrument_records
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER instrument_assignments_moves_register AFTER INSERT OR UPDATE OR DELETE ON instrument_assignments
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER gauge_operators_moves_register AFTER INSERT OR UPDATE OR DELETE ON gauge_operators
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER standard_counts_moves_register AFTER INSERT OR UPDATE OR DELETE ON standard_counts
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER instrument_tolerances_moves_register AFTER INSERT OR UPDATE OR DELETE ON instrument_tolerances
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER clause_instrument_policy_moves_register AFTER INSERT OR UPDATE OR DELETE ON clause_instrument_policy
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();
CREATE TRIGGER gauge_offsets_moves_register AFTER INSERT OR UPDATE OR DELETE ON gauge_offsets
    FOR EACH STATEMENT EXECUTE FUNCTION bump_register_revision();

-- PostgreSQL numbers a project's tests from a sequence of its own (see `db::numbering`):
-- `nextval` takes no lock another writer waits for; the counter table stays for SQLite.
DO $$
DECLARE r RECORD;
BEGIN
    FOR r IN SELECT project_id, last_number FROM test_counters LOOP
        EXECUTE format('CREATE SEQUENCE test_numbers_%s', r.project_id);
        IF r.last_number > 0 THEN
            PERFORM setval(format('test_numbers_%s', r.project_id), r.last_number);
        END IF;
    END LOOP;
END;
$$;

CREATE OR REPLACE FUNCTION count_tests_of_new_projects() RETURNS trigger LANGUAGE plpgsql AS $$
DECLARE r RECORD;
BEGIN
    INSERT INTO test_counters (project_id, last_number) SELECT id, 0 FROM new_rows;
    FOR r IN SELECT id FROM new_rows LOOP
        EXECUTE format('CREATE SEQUENCE test_numbers_%s', r.id);
    END LOOP;
    RETURN NULL;
END;
$$;
