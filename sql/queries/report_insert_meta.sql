INSERT INTO meta (name, value, is_bool) VALUES (:name, :value, :is_bool);
