/* 12-bit readings from the 10-bit ADC by oversampling and decimation. */
#ifndef ADC_H
#define ADC_H
#include <stdint.h>

void adc_init(void);
/* One 12-bit reading (0..4092) of ADC input `input` (0..5), referred to AVcc. */
uint16_t adc_read12(uint8_t input);

#endif
