/* Build-time settings of the reference rig firmware. Each can be overridden from make:
 *   make -C firmware FRAME_HZ=5 RIG_ID=bench-b
 */
#ifndef CONFIG_H
#define CONFIG_H

#ifndef FRAME_HZ
#define FRAME_HZ 10 /* data frames per second, per channel */
#endif

#ifndef BAUD
#define BAUD 250000UL /* 16 MHz / (16 * 250000) = 4 exactly: 0 % baud error */
#endif

#ifndef RIG_ID
#define RIG_ID "cv328"
#endif

#define FIRMWARE_VERSION "1.0.0"
#define ADC_BITS 12
#define CHANNELS 2

/* Protocol v1: no heartbeat for this long while a load is on cuts every load. */
#define HEARTBEAT_TIMEOUT_MS 5000UL

#define FRAME_PERIOD_MS (1000UL / FRAME_HZ)

#if FRAME_HZ < 1 || FRAME_HZ > 50
#error "FRAME_HZ must be 1..50: each frame takes about 5 ms of conversions per channel"
#endif

#endif
