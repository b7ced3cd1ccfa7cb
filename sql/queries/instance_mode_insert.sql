-- One mode of an instance from one source (store_write_context.c).
INSERT OR IGNORE INTO instance_modes (instance_id, mode, rank, source)
VALUES (:instance_id, :mode, :rank, :source);
