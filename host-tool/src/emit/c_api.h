/* ---- the correction (logtrim::fixed): bit for bit the Rust fixed path ---- */

/* Corrects one reading: log code and temperature in m°C. */
ltrm_status ltrm_correct(const ltrm_fixed *c, uint32_t code, int32_t temp_mc, ltrm_reading *out);
/* Corrects one reading from raw codes: log code and temperature channel code. */
ltrm_status ltrm_correct_raw(const ltrm_fixed *c, uint32_t code, uint32_t temp_code, ltrm_reading *out);
/* The temperature stage once, for many log codes at one temperature. */
ltrm_status ltrm_stage_millicelsius(const ltrm_fixed *c, int32_t temp_mc, ltrm_stage *s);
ltrm_status ltrm_stage_code(const ltrm_fixed *c, uint32_t temp_code, ltrm_stage *s);
/* The log-channel part of a correction at a stage. */
ltrm_status ltrm_correct_staged(const ltrm_fixed *c, const ltrm_stage *s, uint32_t code, ltrm_reading *out);
/* Many log codes at one stage (a DMA buffer): status[i] and out[i] are ltrm_correct_staged of codes[i]. */
void ltrm_correct_block(const ltrm_fixed *c, const ltrm_stage *s, const uint32_t *codes, uint32_t n,
                        ltrm_reading *out, ltrm_status *status);
/* A stage cache belongs to one calibration: initialise it again after loading another. */
void ltrm_stage_cache_init(ltrm_stage_cache *k, const ltrm_fixed *c);
ltrm_status ltrm_stage_cache_correct_raw(ltrm_stage_cache *k, uint32_t code, uint32_t temp_code, ltrm_reading *out);
ltrm_status ltrm_stage_cache_correct(ltrm_stage_cache *k, uint32_t code, int32_t temp_mc, ltrm_reading *out);
/* The per-sample path at a held or slowly wandering temperature (logtrim::fixed::CodeTable): x from a table
 * over the log code for the temperature's window, within the bound `logtrim verify` proves for it (its
 * "code table" row), and bit for bit the stage cache's where the table falls back. One table belongs to one
 * calibration: initialise it again after loading another. */
void ltrm_code_table_init(ltrm_code_table *t, const ltrm_fixed *c);
ltrm_status ltrm_code_table_correct(ltrm_code_table *t, uint32_t code, int32_t temp_mc, ltrm_reading *out);
ltrm_status ltrm_code_table_correct_raw(ltrm_code_table *t, uint32_t code, uint32_t temp_code, ltrm_reading *out);
/* Many log codes at one temperature (a DMA buffer): status[i] and out[i] are the one-sample call's for codes[i]. */
void ltrm_code_table_block(ltrm_code_table *t, int32_t temp_mc, const uint32_t *codes, uint32_t n, ltrm_reading *out,
                           ltrm_status *status);
void ltrm_code_table_block_raw(ltrm_code_table *t, uint32_t temp_code, const uint32_t *codes, uint32_t n,
                               ltrm_reading *out, ltrm_status *status);
/* The reading in a unit: Q32 for LTRM_RATIO, Q24 for the others. */
ltrm_status ltrm_value(const ltrm_reading *r, ltrm_unit_kind unit, int64_t *out);

/* ---- text ---- */

/* A short English description of a status (never NULL). */
const char *ltrm_status_text(ltrm_status status);

/* ---- run-time images (logtrim::image): checked in the Rust loader's order, tables copied into RAM ---- */

/* CRC-32/ISO-HDLC of n bytes, continued from crc (start with 0). */
uint32_t ltrm_crc32(uint32_t crc, const uint8_t *bytes, uint32_t n);
/* Checks len bytes as exactly one image (Image::parse): magic, version, length, CRC-32, sections, every
 * value. Fills *info (when not NULL) on success. */
ltrm_status ltrm_image_check(const uint8_t *bytes, uint32_t len, ltrm_image_info *info);
/* Checks an image and loads its fixed-point tables into ram (Image::parse, then Image::fixed_into):
 * LTRM_MISSING_SECTION without a fixed section, LTRM_FIXED_CAPACITY when a table does not fit ram,
 * LTRM_BAD_FIXED_TABLES when the tables fail their checks. On success *cal borrows ram; on failure *cal
 * is emptied (every correction with it is an error, never a value). prefix != 0 accepts bytes after the
 * image (a slot larger than the image: Image::parse_prefix). */
ltrm_status ltrm_image_load(const uint8_t *bytes, uint32_t len, int prefix, const ltrm_ram *ram, ltrm_fixed *cal,
                            ltrm_image_info *info);
/* The newer image of two slots whose tables load (slots::select_fixed), loaded into ram: LTRM_OK with
 * *cal, *info and *sel filled, or LTRM_NO_VALID_RECORD (both slots' reasons in *sel, *cal emptied). */
ltrm_status ltrm_image_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len, const ltrm_ram *ram,
                              ltrm_fixed *cal, ltrm_image_info *info, ltrm_selection *sel);

/* ---- field records (logtrim::field): trims and blanks over the factory reading ---- */

/* Checks len bytes as exactly one record (prefix != 0: a record at the start of a slot). */
ltrm_status ltrm_trim_parse(const uint8_t *bytes, uint32_t len, int prefix, ltrm_trim *out);
ltrm_status ltrm_blank_parse(const uint8_t *bytes, uint32_t len, int prefix, ltrm_blank *out);
/* The newer usable record of two slots (field::slots::select). factory: the identity of the calibration in
 * use, or NULL to accept records bound to any; a record bound to another is LTRM_OTHER_CALIBRATION. */
ltrm_status ltrm_trim_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len,
                             const uint32_t *factory, ltrm_trim *out, ltrm_selection *sel);
ltrm_status ltrm_blank_select(const uint8_t *a, uint32_t a_len, const uint8_t *b, uint32_t b_len,
                              const uint32_t *factory, ltrm_blank *out, ltrm_selection *sel);
/* Installs a trim and a blank (either may be NULL) after checking them (Layers::new): each against the
 * calibration in use (factory, or NULL for no check), the trim against the limits. *layers is left with
 * no layers on failure. */
ltrm_status ltrm_layers_init(ltrm_layers *layers, const ltrm_trim *trim, const ltrm_blank *blank,
                             const ltrm_trim_limits *limits, const uint32_t *factory);
/* A factory reading through the layers (Layers::apply_fixed): LTRM_ABOVE_RANGE/LTRM_BELOW_RANGE only
 * where the result leaves the Q24 range. */
ltrm_status ltrm_layers_apply(const ltrm_layers *layers, const ltrm_reading *factory, ltrm_reading *out);
