/* Start-up of the C demo on Cortex-M: vector table, copy of .data, zeroed
 * .bss, the FPU enabled on a core that has one, then main(). The symbols
 * come from the board's linker script. */
#include <stdint.h>

extern uint32_t __data_load, __data_start, __data_end, __bss_start, __bss_end, __stack_top;
extern int main(void);

void Reset_Handler(void) __attribute__((noreturn));
void Default_Handler(void) __attribute__((noreturn));

void Default_Handler(void) {
    /* A fault or an unexpected interrupt: stop here (QEMU's timeout ends
     * the run, and the xtask reports it). */
    for (;;) {
    }
}

void Reset_Handler(void) {
    uint32_t *src = &__data_load;
    uint32_t *dst = &__data_start;
    while (dst < &__data_end) {
        *dst++ = *src++;
    }
    for (dst = &__bss_start; dst < &__bss_end; dst++) {
        *dst = 0;
    }
#if defined(__ARM_FP)
    /* CPACR: full access to coprocessors 10 and 11 (the FPU). */
    *(volatile uint32_t *)0xE000ED88u |= 0xFu << 20;
    __asm__ volatile("dsb\n\tisb" ::: "memory");
#endif
    (void)main();
    for (;;) {
    }
}

/* Initial stack pointer, then the 15 system exceptions. */
__attribute__((section(".vectors"), used)) static void (*const vectors[16])(void) = {
    (void (*)(void))(&__stack_top),
    Reset_Handler,
    Default_Handler, /* NMI */
    Default_Handler, /* HardFault */
    Default_Handler, /* MemManage */
    Default_Handler, /* BusFault */
    Default_Handler, /* UsageFault */
    0, 0, 0, 0,
    Default_Handler, /* SVCall */
    Default_Handler, /* DebugMonitor */
    0,
    Default_Handler, /* PendSV */
    Default_Handler, /* SysTick */
};
