-- One SR value with its provenance (store_instances.c).
INSERT INTO sr_values (instance_id, study_instance_uid, quantity, value,
                       raw_value, unit, normalised, concept, concept_meaning,
                       item_position, mode)
VALUES (:instance_id, :study_instance_uid, :quantity, :value, :raw_value,
        :unit, :normalised, :concept, :concept_meaning, :item_position,
        :mode);
