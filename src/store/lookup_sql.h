/* Lookups that several steps of one command make: one text each, so that
 * the connection's statement cache (store/stmt.h), which finds a statement
 * by the address of its text, prepares each once per command. Defined in
 * record_load.c. Private to src/store. */
#ifndef FXL_STORE_LOOKUP_SQL_H
#define FXL_STORE_LOOKUP_SQL_H

/* :mrn -> id, mrn, family_name, given_name */
extern const char fxl_sql_patient_by_mrn[];
/* :serial -> id, reading_unit */
extern const char fxl_sql_detector_by_serial[];

#endif
