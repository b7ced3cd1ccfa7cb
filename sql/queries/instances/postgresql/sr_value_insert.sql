-- PostgreSQL: one SR value with its provenance (store_write_context.c), in
-- the month partition of its instance.
INSERT INTO sr_values (instance_id, first_received_at, study_instance_uid, quantity, value,
                       raw_value, unit, normalised, concept, concept_meaning,
                       item_position, mode)
SELECT k.id, k.first_received_at, :study_instance_uid::text, :quantity::text,
       :value::double precision, :raw_value::text, :unit::text, :normalised::double precision,
       :concept::text, :concept_meaning::text, :item_position::text, :mode::text
FROM instance_keys AS k WHERE k.id = :instance_id::bigint;
