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

#ifndef CC_LOAD
#define CC_LOAD 0 /* 1: the CC variant (make VARIANT=cc): constant-current loads and chargers */
#endif

#ifndef RIG_ID
#if CC_LOAD
#define RIG_ID "cv328cc"
#else
#define RIG_ID "cv328"
#endif
#endif

#if CC_LOAD
#define FIRMWARE_VERSION "1.1.0"
#else
#define FIRMWARE_VERSION "1.0.0"
#endif
#define ADC_BITS 12
#define CHANNELS 2

/* Protocol v1: no heartbeat for this long while a load is on cuts every load. */
#define HEARTBEAT_TIMEOUT_MS 5000UL

#define FRAME_PERIOD_MS (1000UL / FRAME_HZ)

#if CC_LOAD
/* The setpoint path of docs/firmware-wiring.md (CC variant): the PWM's filtered voltage, a
 * fraction CC_DIV_BOTTOM / (CC_DIV_TOP + CC_DIV_BOTTOM) of AVcc at full duty, is held across
 * the shunt by the loop's op-amp; the current amplifier (gain AMP_GAIN) reads it against the
 * same AVcc, so counts per PWM step = 4096 / 256 x divider x gain (about 12.0), whatever AVcc is. */
#define CC_DIV_TOP_OHM 10000.0
#define CC_DIV_BOTTOM_OHM 150.0
#define AMP_GAIN 50.9
/* PWM steps per count of the current input, in 1/256 step, times 256 (about 5445). */
#define CC_Q8_PER_COUNT_Q8 \
	((uint32_t)(4096.0 * (CC_DIV_TOP_OHM + CC_DIV_BOTTOM_OHM) / (CC_DIV_BOTTOM_OHM * AMP_GAIN) + 0.5))
/* The trim reaches at most 25.6 PWM steps (a tenth of full scale) either way: enough for the
 * divider's tolerance and both op-amps' offsets, and a bound on wind-up when the cell can no
 * longer drive the current. */
#define CC_TRIM_MAX_Q8 6554
/* Setpoint range declared in the capability line: 2 PWM steps up to 3000 counts (about 2.9 A,
 * under the 3 A limit of the rig profile and the 3.15 A fuse). */
#define CC_MIN_COUNTS 24
#define CC_MAX_COUNTS 3000
#endif

#if FRAME_HZ < 1 || FRAME_HZ > 50
#error "FRAME_HZ must be 1..50: each frame takes about 5 ms of conversions per channel"
#endif

#endif
