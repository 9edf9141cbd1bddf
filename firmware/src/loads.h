/* The load switches (PB0 for channel 0, PB1 for channel 1) and the heartbeat watchdog. */
#ifndef LOADS_H
#define LOADS_H
#include <stdbool.h>
#include <stdint.h>
#include "config.h"

void loads_set(uint8_t ch, bool on);
bool loads_on(uint8_t ch);
/* Flags of a data frame: bit 0 the load is on, bit 1 the rig cut it itself. */
uint8_t loads_flags(uint8_t ch);
/* Marks every channel as cut by the rig (after a watchdog or brown-out reset). */
void loads_mark_all_cut(void);
void loads_heartbeat(void);
/* The channels (a bit each) the heartbeat watchdog has cut since the last call, so the main
 * loop can say so. */
uint8_t loads_take_beat_lost(void);

#if CC_LOAD
/* Protocol 1.1 modes of a channel (CC variant): rest (everything off), discharge (the
 * constant-current load on), charge (the charger on). */
enum { MODE_REST, MODE_DISCHARGE, MODE_CHARGE };
uint8_t loads_mode(uint8_t ch);
void loads_mode_set(uint8_t ch, uint8_t mode);
#endif

#endif
