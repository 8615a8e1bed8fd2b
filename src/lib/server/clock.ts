/** The clinic's clock: "today" is the calendar date in the configured time zone (CLINIC_TIME_ZONE). */
import { config } from './config';
import { todayIn } from '../dates';

export const clinicTimeZone = () => config.timeZone;
export const clinicToday = (now: Date = new Date()) => todayIn(config.timeZone, now);
