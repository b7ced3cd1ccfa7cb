-- An instance (re)stored: its older pixel reading goes. ?1 instance id.
DELETE FROM screen_readings WHERE instance_id = ?1;
