/* The bench driver with the C library and the unit's data in its own translation unit: a build per serial
 * that lets the compiler see the unit's constants (scripts/bench-arm.sh measures it next to the library
 * compiled on its own, which is what a firmware that loads images at run time gets). */
#include "ltrm.c"
#include "unit.c"
#include "driver.c"
