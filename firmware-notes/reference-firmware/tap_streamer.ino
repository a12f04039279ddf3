// tap_streamer.ino: reference firmware for tapmodes.
//
// Streams a 3-axis MEMS accelerometer (SPI, data-ready interrupt, output data rate of at
// least 3.2 kHz) and, optionally, an analog force channel from an instrumented hammer, over
// the board's native USB serial port, in either wire form of ../protocol.md:
//   text   : "# rate_hz=... channels=..." header line, then one "x,y,z\n" line per sample
//   binary : COBS-framed packets (type, seq u16 LE, payload, CRC-16/IBM-3740 u16 LE), 0x00
//            delimited. COBS: Cheshire & Baker, "Consistent Overhead Byte Stuffing",
//            IEEE/ACM Trans. Networking, 1999.
// Commands from the host (single bytes): 't' text form, 'b' binary form (restarts the
// sequence), 'h' send the header again.
//
// SAFETY: bench use only. Propellers off, flight battery disconnected, craft secured so that
// nothing can spin up or fall. Follow the manufacturer's guidance for every part you test
// and your local rules.
//
// Target: any 32-bit microcontroller board with native USB and the Arduino core API
// (Serial, SPI, attachInterrupt, micros). Everything marked CHECK is a placeholder that must
// be checked against your sensor's datasheet and your board's pinout before use; nothing
// here describes a particular part.

#include <Arduino.h>
#include <SPI.h>
#include <string.h>

// ------------------------------------------------------------------ build options

#ifndef START_FORM
#define START_FORM 't'          // form at power-up: 't' (bring-up) or 'b'; switchable at run time
#endif
#ifndef WITH_FORCE_CHANNEL
#define WITH_FORCE_CHANNEL 1    // 1: add a "force" channel read from an ADC pin at each sample
#endif
#ifndef USE_TX_SPACE_CHECK
#define USE_TX_SPACE_CHECK 1    // 1: drop (and count) packets the USB buffer cannot take now,
                                // instead of blocking; set 0 if your core's
                                // Serial.availableForWrite() always returns 0
#endif

constexpr uint32_t SERIAL_BAUD = 921600;   // ignored by native USB CDC; matters on a UART
constexpr int PIN_CS = 10;                 // CHECK: chip select of the sensor
constexpr int PIN_DRDY = 2;                // CHECK: sensor data-ready output (interrupt capable)
constexpr int PIN_FORCE = A0;              // CHECK: conditioned hammer signal (0..Vref)
constexpr uint32_t SPI_HZ = 5000000;       // CHECK: the sensor's maximum SPI clock
#define SENSOR_SPI_MODE SPI_MODE3            // CHECK: mode 0 or 3 on most MEMS parts
constexpr double NOMINAL_RATE_HZ = 3200.0; // what the rate register below selects
constexpr size_t FRAMES_PER_PACKET = 32;   // 10 ms of data per packet at 3.2 kHz
constexpr uint32_t STALL_US = 10000;       // no data-ready for this long: read to unlatch

// ------------------------------------------------------------------ sensor (PLACEHOLDERS)
// A generic register map. Addresses, values, flag bits and the output byte order differ from
// part to part: CHECK every line against the datasheet.
namespace reg {
constexpr uint8_t WHO_AM_I = 0x0F;          // CHECK: identity register
constexpr uint8_t WHO_AM_I_VALUE = 0x00;    // CHECK: the identity your part reports
constexpr uint8_t RESET = 0x1F;             // CHECK: soft-reset register
constexpr uint8_t RESET_VALUE = 0x80;       // CHECK
constexpr uint8_t RATE = 0x20;              // CHECK: output data rate / power mode
constexpr uint8_t RATE_3200HZ = 0x0F;       // CHECK: value for >= 3.2 kHz, normal power
constexpr uint8_t RANGE = 0x21;             // CHECK: full-scale range, resolution
constexpr uint8_t RANGE_16G = 0x03;         // CHECK: +-16 g, full resolution
constexpr uint8_t INT_CONFIG = 0x22;        // CHECK: interrupt pin: push-pull, active high
constexpr uint8_t INT_CONFIG_VALUE = 0x00;  // CHECK
constexpr uint8_t INT_ENABLE = 0x23;        // CHECK: route data-ready to the INT pin
constexpr uint8_t INT_DRDY = 0x01;          // CHECK
constexpr uint8_t POWER = 0x24;             // CHECK: leave standby, start measuring
constexpr uint8_t POWER_MEASURE = 0x08;     // CHECK
constexpr uint8_t OUT_X_L = 0x28;           // CHECK: first of X_L X_H Y_L Y_H Z_L Z_H
constexpr uint8_t SPI_READ = 0x80;          // CHECK: read flag in the address byte
constexpr uint8_t SPI_MULTI = 0x40;         // CHECK: auto-increment flag (some parts: none)
constexpr int OUTPUT_SHIFT = 0;             // CHECK: right shift for left-justified data
}  // namespace reg

// CHECK: g per count at the chosen range and output width (after OUTPUT_SHIFT).
constexpr double ACCEL_G_PER_COUNT = 0.000488;
// CALIBRATE: newtons per ADC count = 1 / (hammer sensitivity [V/N] * conditioning gain *
// counts per volt). The value here is only a placeholder.
constexpr double FORCE_N_PER_COUNT = 0.01;

// ------------------------------------------------------------------ protocol constants
// Keep in step with ../protocol.md.
constexpr uint8_t PKT_HEADER = 0x01;
constexpr uint8_t PKT_SAMPLES = 0x02;
constexpr uint8_t PKT_NOTE = 0x03;
constexpr uint8_t PROTOCOL_VERSION = 1;
constexpr size_t MAX_PACKET_LEN = 1024;                        // before COBS, with CRC
constexpr size_t MAX_ENCODED_LEN = MAX_PACKET_LEN + MAX_PACKET_LEN / 254 + 1;
constexpr size_t N_CHANNELS = 3 + WITH_FORCE_CHANNEL;
constexpr uint8_t SAMPLE_BYTES = 2;                            // i16 samples

static_assert(sizeof(double) == 8, "the header carries IEEE 754 binary64 values");
static_assert(9 + FRAMES_PER_PACKET * N_CHANNELS * SAMPLE_BYTES <= MAX_PACKET_LEN,
              "FRAMES_PER_PACKET too large for one packet");

#if WITH_FORCE_CHANNEL
static const char *const CHANNEL_NAMES[N_CHANNELS] = {"force", "accel_x", "accel_y", "accel_z"};
static const char *const CHANNEL_UNITS[N_CHANNELS] = {"N", "g", "g", "g"};
static const double CHANNEL_SCALES[N_CHANNELS] = {FORCE_N_PER_COUNT, ACCEL_G_PER_COUNT,
                                                  ACCEL_G_PER_COUNT, ACCEL_G_PER_COUNT};
#else
static const char *const CHANNEL_NAMES[N_CHANNELS] = {"accel_x", "accel_y", "accel_z"};
static const char *const CHANNEL_UNITS[N_CHANNELS] = {"g", "g", "g"};
static const double CHANNEL_SCALES[N_CHANNELS] = {ACCEL_G_PER_COUNT, ACCEL_G_PER_COUNT,
                                                  ACCEL_G_PER_COUNT};
#endif

// ------------------------------------------------------------------ state

static char g_form = START_FORM;
static double g_rate_hz = NOMINAL_RATE_HZ;     // replaced by the measured rate in setup()
static uint16_t g_seq = 0;                     // sequence number of the next packet
static uint32_t g_frame = 0;                   // index of the next frame the sensor produces
static uint32_t g_block_first = 0;             // frame index of g_block[0]
static size_t g_block_len = 0;
static int16_t g_block[FRAMES_PER_PACKET][N_CHANNELS];
static uint8_t g_raw[MAX_PACKET_LEN];          // packet before COBS
static uint8_t g_enc[MAX_ENCODED_LEN + 1];     // after COBS, plus the 0x00 delimiter

static volatile uint32_t g_drdy_count = 0;     // data-ready edges seen by the interrupt
static uint32_t g_drdy_handled = 0;
static uint32_t g_last_data_us = 0;
static bool g_sensor_ok = false;

// ------------------------------------------------------------------ CRC and COBS

// CRC-16/IBM-3740 (a.k.a. CCITT-FALSE): width 16, poly 0x1021, init 0xFFFF, not reflected,
// xorout 0x0000. Check value for the ASCII bytes "123456789": 0x29B1.
static uint16_t crc16_ibm3740(const uint8_t *p, size_t n) {
  uint16_t crc = 0xFFFF;
  while (n--) {
    crc ^= (uint16_t)(*p++) << 8;
    for (int bit = 0; bit < 8; bit++) {
      crc = (crc & 0x8000) ? (uint16_t)((crc << 1) ^ 0x1021) : (uint16_t)(crc << 1);
    }
  }
  return crc;
}

// COBS encoding of in[0..len) into out (at most len + len/254 + 1 bytes, none of them zero);
// the caller appends the 0x00 delimiter. A message ending on a full 254-byte block gets no
// extra 0x01 block (the host accepts both endings).
static size_t cobs_encode(const uint8_t *in, size_t len, uint8_t *out) {
  size_t code_at = 0;
  size_t o = 1;
  uint8_t code = 1;
  for (size_t i = 0; i < len; i++) {
    if (in[i] == 0) {
      out[code_at] = code;
      code_at = o++;
      code = 1;
    } else {
      out[o++] = in[i];
      code++;
      if (code == 0xFF && i + 1 < len) {
        out[code_at] = code;
        code_at = o++;
        code = 1;
      }
    }
  }
  out[code_at] = code;
  return o;
}

// ------------------------------------------------------------------ packet building

static size_t put_u8(uint8_t *p, size_t at, uint8_t v) {
  p[at] = v;
  return at + 1;
}
static size_t put_u16(uint8_t *p, size_t at, uint16_t v) {
  p[at] = (uint8_t)v;
  p[at + 1] = (uint8_t)(v >> 8);
  return at + 2;
}
static size_t put_u32(uint8_t *p, size_t at, uint32_t v) {
  for (int i = 0; i < 4; i++) p[at + i] = (uint8_t)(v >> (8 * i));
  return at + 4;
}
static size_t put_f64(uint8_t *p, size_t at, double v) {
  uint64_t bits;
  memcpy(&bits, &v, 8);
  for (int i = 0; i < 8; i++) p[at + i] = (uint8_t)(bits >> (8 * i));
  return at + 8;
}
static size_t put_label(uint8_t *p, size_t at, const char *s) {
  size_t n = strlen(s);
  if (n > 24) n = 24;  // the host accepts up to 255; 24 keeps headers small
  at = put_u8(p, at, (uint8_t)n);
  memcpy(p + at, s, n);
  return at + n;
}

// Sends the packet whose payload (payload_len bytes) is already at g_raw + 3. The sequence
// number is used up even when the packet has to be dropped, so the host sees the loss.
static void send_packet(uint8_t type, size_t payload_len) {
  size_t n = put_u8(g_raw, 0, type);
  n = put_u16(g_raw, n, g_seq);
  n += payload_len;
  uint16_t crc = crc16_ibm3740(g_raw, n);
  n = put_u16(g_raw, n, crc);
  size_t e = cobs_encode(g_raw, n, g_enc);
  g_enc[e++] = 0x00;
  g_seq++;  // wraps at 65535 -> 0
#if USE_TX_SPACE_CHECK
  if ((size_t)Serial.availableForWrite() < e) return;  // host not keeping up: drop it
#endif
  Serial.write(g_enc, e);
}

static void send_binary_header() {
  size_t n = 3;
  n = put_u8(g_raw, n, PROTOCOL_VERSION);
  n = put_u8(g_raw, n, SAMPLE_BYTES);
  n = put_u8(g_raw, n, (uint8_t)N_CHANNELS);
  n = put_u8(g_raw, n, 0);  // reserved
  n = put_f64(g_raw, n, g_rate_hz);
  for (size_t c = 0; c < N_CHANNELS; c++) {
    n = put_f64(g_raw, n, CHANNEL_SCALES[c]);
    n = put_label(g_raw, n, CHANNEL_NAMES[c]);
    n = put_label(g_raw, n, CHANNEL_UNITS[c]);
  }
  uint8_t zero = 0x00;
  Serial.write(&zero, 1);  // cut off whatever the host may have half-received
  send_packet(PKT_HEADER, n - 3);
}

// Sends the collected frames as one sample packet (frames in a packet are consecutive).
static void flush_block() {
  if (g_block_len == 0) return;
  size_t n = put_u32(g_raw, 3, g_block_first);
  for (size_t f = 0; f < g_block_len; f++) {
    for (size_t c = 0; c < N_CHANNELS; c++) n = put_u16(g_raw, n, (uint16_t)g_block[f][c]);
  }
  send_packet(PKT_SAMPLES, n - 3);
  g_block_len = 0;
}

// ------------------------------------------------------------------ text form

static void print_double(double v) {
  // Enough digits for the scales and rates used here; the host parses any decimal form.
  Serial.print(v, 9);
}

static void send_text_header() {
  Serial.print("# rate_hz=");
  Serial.print(g_rate_hz, 2);
  Serial.print(" channels=");
  for (size_t c = 0; c < N_CHANNELS; c++) {
    if (c) Serial.print(',');
    Serial.print(CHANNEL_NAMES[c]);
  }
  Serial.print(" units=");
  for (size_t c = 0; c < N_CHANNELS; c++) {
    if (c) Serial.print(',');
    Serial.print(CHANNEL_UNITS[c]);
  }
  Serial.print(" scale=");
  for (size_t c = 0; c < N_CHANNELS; c++) {
    if (c) Serial.print(',');
    print_double(CHANNEL_SCALES[c]);
  }
  Serial.print('\n');
}

// Writes "v0,v1,...\n" with one call to Serial.write.
static void send_text_frame(const int16_t *v) {
  char line[N_CHANNELS * 7 + 1];
  size_t n = 0;
  for (size_t c = 0; c < N_CHANNELS; c++) {
    if (c) line[n++] = ',';
    int32_t x = v[c];
    if (x < 0) {
      line[n++] = '-';
      x = -x;
    }
    char digits[6];
    int d = 0;
    do {
      digits[d++] = (char)('0' + x % 10);
      x /= 10;
    } while (x);
    while (d) line[n++] = digits[--d];
  }
  line[n++] = '\n';
  Serial.write((const uint8_t *)line, n);
}

// ------------------------------------------------------------------ either form

static void send_note(const char *text) {
  if (g_form == 'b') {
    size_t n = strlen(text);
    if (n > MAX_PACKET_LEN - 5) n = MAX_PACKET_LEN - 5;
    memcpy(g_raw + 3, text, n);
    send_packet(PKT_NOTE, n);
  } else {
    Serial.print("# note: ");  // a '#' line without rate_hz/channels is a note
    Serial.print(text);
    Serial.print('\n');
  }
}

static void send_header() {
  if (g_form == 'b') {
    send_binary_header();
  } else {
    send_text_header();
  }
}

// Starts the binary form afresh: sequence 0 and frame 0 tell the host "restart".
static void start_binary() {
  g_form = 'b';
  g_seq = 0;
  g_frame = 0;
  g_block_len = 0;
  send_binary_header();
}

static void start_text() {
  flush_block();
  g_form = 't';
  send_text_header();
}

// The sensor overwrote `missed` frames before they were read: keep the frame counter true.
static void frames_missed(uint32_t missed) {
  if (g_form == 'b') {
    flush_block();
    g_frame += missed;
  } else {
    g_frame += missed;
    char msg[40] = "missed frames: ";
    size_t n = strlen(msg);
    char digits[11];
    int d = 0;
    do {
      digits[d++] = (char)('0' + missed % 10);
      missed /= 10;
    } while (missed);
    while (d) msg[n++] = digits[--d];
    msg[n] = 0;
    send_note(msg);
  }
}

static void emit_frame(const int16_t *v) {
  if (g_form == 'b') {
    if (g_block_len == 0) g_block_first = g_frame;
    memcpy(g_block[g_block_len], v, sizeof(g_block[0]));
    g_block_len++;
    if (g_block_len == FRAMES_PER_PACKET) flush_block();
  } else {
    send_text_frame(v);
  }
  g_frame++;
}

// ------------------------------------------------------------------ sensor access

static void sensor_write(uint8_t r, uint8_t v) {
  SPI.beginTransaction(SPISettings(SPI_HZ, MSBFIRST, SENSOR_SPI_MODE));
  digitalWrite(PIN_CS, LOW);
  SPI.transfer(r & 0x7F);
  SPI.transfer(v);
  digitalWrite(PIN_CS, HIGH);
  SPI.endTransaction();
}

static void sensor_read(uint8_t r, uint8_t *buf, size_t n) {
  SPI.beginTransaction(SPISettings(SPI_HZ, MSBFIRST, SENSOR_SPI_MODE));
  digitalWrite(PIN_CS, LOW);
  SPI.transfer(r | reg::SPI_READ | (n > 1 ? reg::SPI_MULTI : 0));
  for (size_t i = 0; i < n; i++) buf[i] = SPI.transfer(0x00);
  digitalWrite(PIN_CS, HIGH);
  SPI.endTransaction();
}

static bool sensor_init() {
  sensor_write(reg::RESET, reg::RESET_VALUE);
  delay(20);
  uint8_t id = 0;
  sensor_read(reg::WHO_AM_I, &id, 1);
  if (id != reg::WHO_AM_I_VALUE) return false;
  sensor_write(reg::RANGE, reg::RANGE_16G);
  sensor_write(reg::RATE, reg::RATE_3200HZ);
  sensor_write(reg::INT_CONFIG, reg::INT_CONFIG_VALUE);
  sensor_write(reg::INT_ENABLE, reg::INT_DRDY);
  sensor_write(reg::POWER, reg::POWER_MEASURE);
  return true;
}

// Reads one frame: the three axes (and the force ADC) as raw counts.
static void read_frame(int16_t *v) {
  uint8_t b[6];
  sensor_read(reg::OUT_X_L, b, 6);  // CHECK: byte order of the output registers
  size_t c = 0;
#if WITH_FORCE_CHANNEL
  v[c++] = (int16_t)analogRead(PIN_FORCE);
#endif
  for (int axis = 0; axis < 3; axis++) {
    int16_t raw = (int16_t)((uint16_t)b[2 * axis] | ((uint16_t)b[2 * axis + 1] << 8));
    v[c++] = (int16_t)(raw >> reg::OUTPUT_SHIFT);
  }
}

static void on_data_ready() { g_drdy_count++; }

// The sensor's own oscillator sets the true rate, often some percent off the nominal one
// (common practice, no source): count data-ready edges against micros() for ~0.5 s.
static double measure_rate() {
  const uint32_t edges = (uint32_t)(NOMINAL_RATE_HZ / 2);
  uint32_t start_wait = micros();
  uint32_t c0 = g_drdy_count;
  while (g_drdy_count == c0) {
    if (micros() - start_wait > 100000) return NOMINAL_RATE_HZ;  // no edges: keep nominal
  }
  uint32_t t0 = micros();
  uint32_t c1 = g_drdy_count;
  uint32_t seen = c1;
  while (g_drdy_count - c1 < edges) {
    if (micros() - t0 > 2000000) return NOMINAL_RATE_HZ;
    if (g_drdy_count != seen) {  // read to clear a latched data-ready (CHECK: your part)
      seen = g_drdy_count;
      int16_t v[N_CHANNELS];
      read_frame(v);
    }
  }
  uint32_t t1 = micros();
  uint32_t counted = g_drdy_count - c1;
  return counted * 1e6 / (double)(t1 - t0);
}

// ------------------------------------------------------------------ commands

static void handle_commands() {
  while (Serial.available() > 0) {
    int c = Serial.read();
    if (c == 'b') {
      start_binary();
    } else if (c == 't') {
      start_text();
    } else if (c == 'h') {
      send_header();  // no restart: the sequence goes on
    }
  }
}

// ------------------------------------------------------------------ setup and loop

void setup() {
  Serial.begin(SERIAL_BAUD);
  uint32_t t = millis();
  while (!Serial && millis() - t < 3000) {
  }
  pinMode(PIN_CS, OUTPUT);
  digitalWrite(PIN_CS, HIGH);
  pinMode(PIN_DRDY, INPUT);
  SPI.begin();
  g_sensor_ok = sensor_init();
  attachInterrupt(digitalPinToInterrupt(PIN_DRDY), on_data_ready, RISING);
  if (g_sensor_ok) g_rate_hz = measure_rate();
  if (g_form == 'b') {
    start_binary();
  } else {
    send_text_header();
  }
  if (!g_sensor_ok) send_note("sensor identity mismatch: check wiring and the register map");
  g_drdy_handled = g_drdy_count;
  g_last_data_us = micros();
}

void loop() {
  handle_commands();
  uint32_t count = g_drdy_count;  // one aligned 32-bit read: atomic on 32-bit cores
  uint32_t pending = count - g_drdy_handled;
  if (pending == 0) {
    // A data-ready that latches until read stops the stream for good if one read was
    // missed: read once to unlatch it (CHECK: whether your part latches).
    if (g_sensor_ok && micros() - g_last_data_us > STALL_US) {
      int16_t v[N_CHANNELS];
      read_frame(v);
      g_last_data_us = micros();
      send_note("data-ready stalled: re-read the sensor");
    }
    return;
  }
  g_drdy_handled = count;
  g_last_data_us = micros();
  if (pending > 1) frames_missed(pending - 1);
  int16_t v[N_CHANNELS];
  read_frame(v);
  emit_frame(v);
}

// Higher rates: most parts have a FIFO. Use its watermark interrupt instead of data-ready,
// burst-read all stored frames in one SPI transaction, emit them in order, and add the
// frames lost by a FIFO overflow (CHECK: the part's overflow flag) with frames_missed().
